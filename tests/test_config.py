"""check_config: every field is checked once, at the door, with a message naming the option and what to do."""

from __future__ import annotations

import dataclasses

import pytest

from roamstat import config
from roamstat.config import Config, check_config
from roamstat.errors import RoamstatError
from roamstat.registry import NULLS
from roamstat.screen import ALWAYS_ON, REASONS


def refused(fragments, **changes):
    with pytest.raises(RoamstatError) as caught:
        check_config(Config(**changes))
    message = str(caught.value)
    assert "\n" not in message
    for fragment in fragments:
        assert fragment in message, message
    return message


def test_defaults_pass():
    cfg = Config()
    assert check_config(cfg) is cfg


def test_every_field_has_a_check():
    # A new Config field needs an entry in config._CHECKS (and, with a flag, in config.OPTIONS).
    assert set(config._CHECKS) == {f.name for f in dataclasses.fields(Config)}
    assert set(config.OPTIONS) <= set(config._CHECKS)


def test_default_nulls_are_the_registry_in_its_order():
    assert Config().nulls == NULLS.defaults() == config.DEFAULT_NULLS
    assert config.NULL_MODELS == NULLS.names()
    assert set(NULLS.defaults()) < set(NULLS.names()), "an offered-only null (states) is not a default"


@pytest.mark.parametrize("field, option", [
    ("max_dop", "--max-dop"), ("max_speed", "--max-speed"), ("spike_speed", "--spike-speed"),
    ("kde_bandwidth", "--kde-bandwidth"),
])
@pytest.mark.parametrize("value", [-1.0, 0.0, float("nan"), float("inf")])
def test_thresholds_must_be_positive_and_finite(field, option, value):
    refused([option, "positive"], **{field: value})


def test_positive_thresholds_and_none_pass():
    check_config(Config(max_dop=5.0, max_speed=3, spike_speed=None, kde_bandwidth=500.0))


def test_mask_grid_positive_and_only_with_masking():
    refused(["--mask-grid"], mask_locations=True, mask_grid=-10.0)
    refused(["--mask-grid", "--mask-locations"], mask_grid=1000.0)
    check_config(Config(mask_locations=True, mask_grid=1000.0))


@pytest.mark.parametrize("replicates", [0, 1, 18, 19.5, "999", True])
def test_replicates_at_least_19_whole(replicates):
    refused(["--replicates", "19"], replicates=replicates)


def test_replicates_19_passes():
    check_config(Config(replicates=19))


def test_unknown_null_lists_the_registered_ones():
    message = refused(["--null", "x"], nulls=("x",))
    assert all(name in message for name in NULLS.names())
    refused(["--null"], nulls=())
    refused(["--null", "once"], nulls=("crw", "crw"))


def test_unknown_keep_code_lists_the_valid_ones():
    message = refused(["--keep", "spikes"], disabled_rules=("spikes",))
    for code in REASONS:
        assert (code in message) == (code not in ALWAYS_ON), code


@pytest.mark.parametrize("code", ALWAYS_ON)
def test_keep_cannot_switch_off_validity_rules(code):
    refused(["--keep", "input file"], disabled_rules=(code,))


@pytest.mark.parametrize("zone", ["BST", "Mars/Olympus", ""])
def test_unknown_time_zone(zone):
    refused(["--tz", "Europe/London"], tz=zone)


@pytest.mark.parametrize("zone", ["UTC", "Europe/London", "America/Denver", "+02:00"])
def test_known_time_zones_pass(zone):
    check_config(Config(tz=zone))


@pytest.mark.parametrize("field, option", [("max_gap", "--max-gap"), ("resample", "--resample")])
@pytest.mark.parametrize("value", ["-3h", "0h", "soon"])
def test_durations_must_be_positive(field, option, value):
    refused([option, "positive duration"], **{field: value})


@pytest.mark.parametrize("changes, option", [
    (dict(alpha=0.0), "--alpha"), (dict(alpha=1.0), "--alpha"), (dict(alpha=-0.05), "--alpha"),
    (dict(min_step=-1.0), "--min-step"), (dict(bootstrap=-1), "--bootstrap"), (dict(bootstrap=2.5), "--bootstrap"),
    (dict(seed=-1), "--seed"), (dict(workers=0), "--workers"), (dict(min_quality="Q"), "--min-quality"),
    (dict(output_format="xlsx"), "--format"), (dict(scheduler="localhost"), "--scheduler"),
    (dict(spike_cos=0.5), "Config.spike_cos"), (dict(gap_factor=0.5), "Config.gap_factor"),
    (dict(min_steps_test=1), "Config.min_steps_test"), (dict(require_3d="yes"), "--require-3d"),
    (dict(id_col=""), "--id-col"), (dict(x_col="east"), "--y-col"),
])
def test_other_fields(changes, option):
    refused([option], **changes)


def test_run_command_checks_before_making_the_folder(sample_csv, tmp_path):
    # The Python entry point refuses a bad value before any computing (today's KeyError / late failure).
    from roamstat.run import run_command

    for cfg in (Config(nulls=("x",)), Config(kde_bandwidth=-5.0), Config(replicates=3)):
        with pytest.raises(RoamstatError):
            run_command("run", [sample_csv], tmp_path / "o", cfg)
        assert not (tmp_path / "o").exists()

"""The command line contract: outputs, manifest, reruns, and one-line errors with exit 2."""

from __future__ import annotations

import hashlib
import json

import pandas as pd
import pytest

from roamstat.cli import main


def run_cli(*args, capsys):
    code = main([str(a) for a in args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def assert_user_error(code, err, *fragments):
    assert code == 2
    lines = [line for line in err.strip().splitlines() if line]
    assert len(lines) == 1, err
    assert lines[0].startswith("roamstat: error: ")
    for fragment in fragments:
        assert fragment in lines[0]


def test_missing_file_is_a_one_line_error(tmp_path, capsys):
    missing = tmp_path / "nope.csv"
    code, _, err = run_cli("steps", missing, "--out", tmp_path / "o", capsys=capsys)
    assert_user_error(code, err, "nope.csv")


def test_directory_as_input_is_a_one_line_error(tmp_path, capsys):
    code, _, err = run_cli("clean", tmp_path, "--out", tmp_path / "o", capsys=capsys)
    assert_user_error(code, err, str(tmp_path))


def test_out_that_is_an_input_is_refused(sample_csv, tmp_path, capsys):
    copy = tmp_path / "in.csv"
    copy.write_bytes(sample_csv.read_bytes())
    code, _, err = run_cli("clean", copy, "--out", copy, capsys=capsys)
    assert_user_error(code, err, "--out")


def test_foreign_non_empty_out_needs_force(sample_csv, tmp_path, capsys):
    out = tmp_path / "o"
    out.mkdir()
    (out / "thesis.docx").write_text("precious")
    code, _, err = run_cli("clean", sample_csv, "--out", out, "--quiet", capsys=capsys)
    assert_user_error(code, err, "--force")
    assert (out / "thesis.docx").read_text() == "precious"
    code, _, _ = run_cli("clean", sample_csv, "--out", out, "--quiet", "--force", capsys=capsys)
    assert code == 0


def test_steps_accounts_for_every_row_and_manifest_hashes_input(sample_csv, tmp_path, capsys):
    out = tmp_path / "o"
    code, _, err = run_cli("steps", sample_csv, "--out", out, capsys=capsys)
    assert code == 0, err
    fixes = pd.read_csv(out / "fixes.csv")
    rejected = pd.read_csv(out / "rejected.csv")
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["rows"]["read"] == len(fixes) + len(rejected)
    assert manifest["inputs"][0]["sha256"] == hashlib.sha256(sample_csv.read_bytes()).hexdigest()
    assert set(pd.read_csv(out / "steps.csv").columns) >= {
        "animal_id", "segment", "t_start", "t_end", "dt_s", "step_m", "heading_rad", "turn_rad", "speed_m_s"}
    assert "outputs in" in err


def test_bad_null_name_is_a_user_error(sample_csv, tmp_path, capsys):
    code, _, err = run_cli("nulltest", sample_csv, "--out", tmp_path / "o", "--null", "crw,brownian", capsys=capsys)
    assert_user_error(code, err, "--null")


def test_workers_must_be_positive(sample_csv, tmp_path, capsys):
    code, _, err = run_cli("fit", sample_csv, "--out", tmp_path / "o", "--workers", "0", capsys=capsys)
    assert_user_error(code, err, "--workers")


def test_inspect_writes_nothing(sample_csv, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    code, out, err = run_cli("inspect", sample_csv, capsys=capsys)
    assert code == 0, err
    assert list(tmp_path.iterdir()) == []
    assert "frame" in out


def test_unexpected_errors_point_to_debug(sample_csv, tmp_path, capsys, monkeypatch):
    import roamstat.pipeline

    def boom(*a, **k):
        raise ZeroDivisionError("simulated bug")

    monkeypatch.setattr(roamstat.pipeline, "compute_steps", boom)
    code, _, err = run_cli("steps", sample_csv, "--out", tmp_path / "o", capsys=capsys)
    assert code == 1
    assert "--debug" in err and "Traceback" not in err
    with pytest.raises(ZeroDivisionError):
        main(["--debug", "steps", str(sample_csv), "--out", str(tmp_path / "o2")])


def test_parquet_input_and_output_match_csv(sample_csv, tmp_path, capsys):
    """The same fixes as Parquet (open format, via pyarrow) give the same steps as the CSV."""
    frame = pd.read_csv(sample_csv)
    frame["timestamp"] = pd.to_datetime(frame["timestamp"], utc=True)
    parquet = tmp_path / "collars.parquet"
    frame.to_parquet(parquet)
    code, _, err = run_cli("steps", parquet, "--out", tmp_path / "pq", "--format", "parquet", "--quiet", capsys=capsys)
    assert code == 0, err
    code, _, err = run_cli("steps", sample_csv, "--out", tmp_path / "csv", "--quiet", capsys=capsys)
    assert code == 0, err
    from_parquet = pd.read_parquet(tmp_path / "pq" / "steps.parquet")
    from_csv = pd.read_csv(tmp_path / "csv" / "steps.csv")
    assert len(from_parquet) == len(from_csv)
    assert (from_parquet["step_m"].to_numpy() - from_csv["step_m"].to_numpy()).max() < 1e-9


def test_screening_option_without_its_column_is_an_error(tmp_path, capsys):
    path = tmp_path / "no_dop.csv"
    path.write_text("id,time,lat,lon\nA,2024-01-01T00:00Z,60,10\nA,2024-01-01T01:00Z,60.01,10\n")
    code, _, err = run_cli("steps", path, "--out", tmp_path / "o", "--max-dop", "5", capsys=capsys)
    assert_user_error(code, err, "--max-dop", "no_dop.csv")


def usage_error(argv, capsys):
    """Exit status and stderr of an argument the parser itself refuses (argparse exits with 2)."""
    with pytest.raises(SystemExit) as stop:
        main([str(a) for a in argv])
    return stop.value.code, capsys.readouterr().err


def test_no_arguments_lists_every_command_with_one_line(capsys):
    from roamstat.cli import COMMANDS

    code, _, err = run_cli(capsys=capsys)
    assert code == 2
    for name, text in COMMANDS.items():
        assert sum(line.split()[:1] == [name] and text in line for line in err.splitlines()) == 1, name


def test_mistyped_flag_shows_that_commands_usage_and_the_nearest_option(sample_csv, tmp_path, capsys):
    code, err = usage_error(["nulltest", sample_csv, "--out", tmp_path / "o", "--replicats", "99"], capsys)
    assert code == 2
    assert "usage: roamstat nulltest" in err
    assert "did you mean --replicates?" in err
    assert not (tmp_path / "o").exists()


def test_option_of_another_command_says_which_commands_use_it(sample_csv, tmp_path, capsys):
    code, err = usage_error(["clean", sample_csv, "--out", tmp_path / "o", "--replicates", "99"], capsys)
    assert code == 2
    assert "usage: roamstat clean" in err
    assert "--replicates is used only by nulltest, run" in err


@pytest.mark.parametrize("command, present, absent", [
    ("inspect", ["--tz", "--max-dop", "--resample"], ["--out", "--replicates", "--null", "--workers", "--no-report"]),
    ("clean", ["--max-dop", "--out", "--mask-locations"], ["--replicates", "--null", "--bootstrap", "--workers",
                                                          "--kde-bandwidth", "--no-report"]),
    ("steps", ["--resample"], ["--replicates", "--seed", "--min-step", "--workers"]),
    ("fit", ["--min-step", "--bootstrap", "--seed", "--workers"], ["--replicates", "--null", "--kde-bandwidth",
                                                                  "--states", "--state-starts"]),
    ("states", ["--states", "--state-steps", "--state-turns", "--state-starts", "--seed", "--min-step", "--workers"],
     ["--bootstrap", "--replicates", "--null", "--kde-bandwidth", "--no-report"]),
    ("nulltest", ["--null", "--replicates", "--alpha", "--states"], ["--kde-bandwidth", "--no-report"]),
    ("ranges", ["--kde-bandwidth", "--workers"], ["--replicates", "--null", "--min-step", "--no-report", "--states"]),
    ("run", ["--replicates", "--kde-bandwidth", "--no-report", "--states", "--state-steps"], []),
])
def test_each_commands_help_shows_only_its_options(command, present, absent, capsys):
    with pytest.raises(SystemExit):
        main([command, "--help"])
    out = capsys.readouterr().out
    for option in present:
        assert f"{option} " in out or f"{option}\n" in out, option
    for option in absent:
        assert option not in out, option


def test_help_names_parquet_input_and_no_stale_pyarrow_remark(capsys):
    with pytest.raises(SystemExit):
        main(["run", "--help"])
    out = " ".join(capsys.readouterr().out.split())
    assert "CSV, GPX or Parquet" in out
    assert "needs pyarrow" not in out


def test_null_help_lists_the_registered_nulls(capsys):
    from roamstat.registry import NULLS

    with pytest.raises(SystemExit):
        main(["nulltest", "--help"])
    out = " ".join(capsys.readouterr().out.split())
    for entry in NULLS:
        assert f"{entry.name}: {entry.summary}" in out


@pytest.mark.parametrize("flags, fragment", [
    (["--max-dop", "-1"], "--max-dop"),
    (["--max-speed", "0"], "--max-speed"),
    (["--keep", "spikes"], "--keep"),
    (["--tz", "BST"], "--tz"),
    (["--replicates", "5"], "--replicates"),
    (["--null", "crw,brownian"], "crw, shuffle, levy"),
])
def test_bad_values_are_one_line_errors_before_any_output(flags, fragment, sample_csv, tmp_path, capsys):
    code, _, err = run_cli("nulltest", sample_csv, "--out", tmp_path / "o", *flags, capsys=capsys)
    assert_user_error(code, err, fragment)
    assert not (tmp_path / "o").exists()


def test_tz_on_times_with_offsets_gives_a_note(sample_csv, tmp_path, capsys):
    # The sample's times all end in Z; a zone for naive times has nothing to act on.
    code, _, err = run_cli("clean", sample_csv, "--out", tmp_path / "o", "--tz", "Europe/London", "--quiet",
                           capsys=capsys)
    assert code == 0
    assert "--tz Europe/London changed nothing" in err
    code, out, _ = run_cli("inspect", sample_csv, "--tz", "Europe/London", capsys=capsys)
    assert code == 0 and "--tz Europe/London changed nothing" in out
    code, _, err = run_cli("clean", sample_csv, "--out", tmp_path / "o2", "--quiet", capsys=capsys)
    assert code == 0 and "changed nothing" not in err


def test_tz_on_naive_times_gives_no_note(tmp_path, capsys):
    path = tmp_path / "naive.csv"
    path.write_text("id,time,lat,lon\nA,2024-01-01 00:00,60,10\nA,2024-01-01 01:00,60.01,10\n")
    code, out, _ = run_cli("inspect", path, "--tz", "Europe/Oslo", capsys=capsys)
    assert code == 0 and "changed nothing" not in out


@pytest.mark.parametrize("low_memory", [[], ["--low-memory"]])
def test_all_rejected_input_still_writes_rejected_csv_and_names_it(low_memory, tmp_path, capsys):
    path = tmp_path / "zeros.csv"
    path.write_text("id,time,lat,lon\nA,2024-01-01T00:00Z,0,0\nA,2024-01-01T01:00Z,0,0\nA,bad,60,10\n")
    out = tmp_path / "o"
    code, _, err = run_cli("clean", path, "--out", out, *low_memory, capsys=capsys)
    assert_user_error(code, err, str(out / "rejected.csv"), "--keep")
    rejected = pd.read_csv(out / "rejected.csv")
    assert sorted(rejected["source_row"]) == [2, 3, 4]
    assert sorted(rejected["reason_code"]) == ["bad_time", "null_island", "null_island"]


def test_file_after_the_options_is_pointed_out(sample_csv, tmp_path, capsys):
    code, err = usage_error(["clean", sample_csv, "--out", tmp_path / "o", "more.csv"], capsys)
    assert code == 2 and "give every FILE before the options" in err
    code, err = usage_error(["clean", sample_csv, "--out", tmp_path / "o", "--quite", "x"], capsys)
    assert code == 2 and "FILE before" not in err

"""Every pair of row-changing options, checked end to end against the tables' own accounting.

The options that change which rows exist or which rows a stage sees are
``--resample``, ``--max-gap``, ``--keep``, ``--mask-locations`` and
``--low-memory``.  For each pair a ``ranges`` run (steps, summary, residency,
ranges) must keep the row accounting (read = kept + rejected), count the same
observed fixes in the summary, residency and the 100 % MCP, leave no animal
undetermined for want of fixes, and a ``--low-memory`` run must write the
same tables as the ordinary run (same injected hidden origin when masking).
These are invariants of the data contract (DEVELOPERS.md), no external source.
"""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roamstat.cli import build_parser, config_from_args
from roamstat.ranges.mask import HiddenOrigin
from roamstat.ranges.estimate import MODEL_RANGES, RANGES
from roamstat.run import run_command

SAMPLE = Path(__file__).resolve().parents[1] / "sample_tracks" / "collars.csv"
NOMINAL_S = 7200.0  # the sample collars fix every 2 h
OPTIONS = {
    "resample": ["--resample", "2h"],
    "max_gap": ["--max-gap", "3h"],
    "keep": ["--keep", "spike"],
    "mask": ["--mask-locations"],
    "low_memory": ["--low-memory"],
}
PAIRS = list(itertools.combinations(OPTIONS, 2))
ORIGIN = HiddenOrigin(55.1, -3.2)  # injected so masked ordinary and streamed runs can be compared
TABLES = ["fixes.csv", "rejected.csv", "steps.csv", "summary.csv", "residency.csv", "ranges.csv", "ranges.geojson"]


@pytest.fixture(scope="module")
def subset(tmp_path_factory) -> Path:
    """Two animals of the sample deployment, each with a spike the screen rejects, and gaps over 3 h."""
    table = pd.read_csv(SAMPLE, dtype=str)
    parts = [table[table["animal_id"] == "CU-R07"].head(480), table[table["animal_id"] == "CU-Q30"]]
    path = tmp_path_factory.mktemp("pairs") / "subset.csv"
    pd.concat(parts).to_csv(path, index=False)
    return path


@pytest.fixture(scope="module")
def runs(subset, tmp_path_factory):
    """Output folder of a run with the given option names (runs shared between the pairs)."""
    done: dict[tuple, Path] = {}

    def run(names: tuple) -> Path:
        key = tuple(sorted(names))
        if key not in done:
            out = tmp_path_factory.mktemp("-".join(key) or "plain")
            argv = ["ranges", str(subset), "--out", str(out), "--quiet", *[a for n in key for a in OPTIONS[n]]]
            run_command("ranges", [str(subset)], out, config_from_args(build_parser().parse_args(argv)), argv,
                        origin=ORIGIN, batch_animals=1)
            done[key] = out
        return done[key]

    return run


@pytest.mark.parametrize("pair", PAIRS, ids=["+".join(p) for p in PAIRS])
def test_option_pair_keeps_the_row_accounting(pair, runs):
    out = runs(pair)
    manifest = json.loads((out / "manifest.json").read_text())
    rows = manifest["rows"]
    fixes = pd.read_csv(out / "fixes.csv")
    rejected = pd.read_csv(out / "rejected.csv")
    summary = pd.read_csv(out / "summary.csv").set_index("animal_id")
    residency = pd.read_csv(out / "residency.csv").set_index("animal_id")
    ranges = pd.read_csv(out / "ranges.csv")
    steps = pd.read_csv(out / "steps.csv")

    # Every input row is kept or rejected, once; grid rows are not input rows.
    assert rows["read"] == rows["kept"] + rows["rejected"] == 480 + 211
    assert len(rejected) == rows["rejected"]
    observed = fixes[~fixes["interpolated"].astype(bool)]
    assert len(observed) == rows["kept"]
    assert ("resample" in pair) == bool(fixes["interpolated"].astype(bool).any())
    # Screening: with --keep spike nothing is rejected, else the two spikes are.
    assert sorted(rejected["reason_code"]) == ([] if "keep" in pair else ["spike", "spike"])

    # Summary, residency and the 100 % MCP all count the observed fixes.
    per_animal = observed.groupby("animal_id").size()
    assert summary["n_fixes"].to_dict() == per_animal.to_dict()
    assert residency["n_fixes"].to_dict() == per_animal.to_dict()
    assert (residency["pattern"] != "undetermined").all()
    mcp = ranges[(ranges["method"] == "mcp") & (ranges["level"] == 100)].set_index("animal_id")
    assert mcp["n_fixes"].to_dict() == per_animal.to_dict()
    assert len(ranges) == len(RANGES + MODEL_RANGES) * len(per_animal)
    data_ranges = ranges[ranges["method"].isin({m for m, _ in RANGES})]
    assert (data_ranges["area_km2"] > 0).all()

    # Steps follow the analysed track: the regular grid, split at long gaps.
    assert set(steps["animal_id"]) == set(per_animal.index)
    if "resample" in pair:
        assert np.allclose(steps["dt_s"], NOMINAL_S)
    if "max_gap" in pair:
        assert steps["dt_s"].max() <= 3 * 3600
        assert (summary["n_segments"] > 1).any()

    if "mask" in pair:
        assert not {"lat", "lon"} & set(fixes.columns) and fixes["masked"].all() and ranges["masked"].all()
    if "low_memory" in pair:
        plain = runs(tuple(n for n in pair if n != "low_memory"))
        for name in TABLES:
            assert (out / name).read_bytes() == (plain / name).read_bytes(), name

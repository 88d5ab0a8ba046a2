"""--low-memory gives the same tables as an ordinary run (design contract, not an external check)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from roamstat.cli import build_parser, config_from_args, main
from roamstat.run import run_command

SAMPLE = Path(__file__).resolve().parents[1] / "sample_tracks" / "collars.csv"
TABLES = ["fixes.csv", "rejected.csv", "steps.csv", "summary.csv", "fits.csv", "null_tests.csv",
          "residency.csv", "ranges.csv", "ranges.geojson", "states.csv", "state_models.csv"]


def messy_second_file(tmp_path: Path) -> Path:
    """A second export: other column names, a ragged row, a repeated header, a duplicate time."""
    lines = ["Animal;Date time;Lat;Lon;Note",
             "ZX-1;2025-05-01 00:00;55,40;-3,60;a",
             "ZX-1;2025-05-01 02:00;55,41;-3,61;b",
             "ZX-1;2025-05-01 02:00;55,42;-3,62;dup",
             "ZX-1;2025-05-01 04:00;55,40",
             "Animal;Date time;Lat;Lon;Note"]
    lines += [f"ZX-1;2025-05-{2 + i // 12:02d} {2 * (i % 12):02d}:00;55,{40 + i % 7};-3,{60 + i % 5};x" for i in range(60)]
    path = tmp_path / "second.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.mark.parametrize("chunk_records,batch_animals", [(700, 2), (100_000, 16)])
def test_streamed_tables_are_byte_identical(tmp_path, chunk_records, batch_animals):
    inputs = [str(SAMPLE), str(messy_second_file(tmp_path))]
    plain, streamed = tmp_path / "plain", tmp_path / "streamed"
    assert main(["run", *inputs, "--out", str(plain), "--replicates", "19", "--state-starts", "2", "--quiet", "--no-report"]) == 0
    args = build_parser().parse_args(["run", *inputs, "--out", str(streamed), "--replicates", "19", "--state-starts", "2", "--quiet",
                                      "--no-report", "--low-memory"])
    run_command("run", inputs, streamed, config_from_args(args), [],
                chunk_records=chunk_records, batch_animals=batch_animals)
    for name in TABLES:
        assert (streamed / name).read_bytes() == (plain / name).read_bytes(), name
    manifest = [json.loads((d / "manifest.json").read_text()) for d in (plain, streamed)]
    assert manifest[0]["rows"] == manifest[1]["rows"]
    assert [f["sha256"] for f in manifest[0]["inputs"]] == [f["sha256"] for f in manifest[1]["inputs"]]
    assert not [p for p in streamed.iterdir() if p.name.startswith(".")], "scratch files left behind"


def test_low_memory_run_with_report(tmp_path):
    out = tmp_path / "o"
    assert main(["run", str(SAMPLE), "--out", str(out), "--replicates", "19", "--state-starts", "2", "--quiet", "--low-memory"]) == 0
    assert (out / "report.html").is_file()

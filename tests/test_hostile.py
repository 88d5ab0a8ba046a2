"""Hostile and broken input: every command ends in exit 0 with every row accounted for, or exit 2
with one line ``roamstat: error: ...`` naming the file.  Never a traceback, never exit 1.

The corpus lives in tests/fixtures/hostile/ with the expected outcome of each file in
EXPECTED.csv; very large cases (thousands of animals, a 100 kB id) are generated here.
Spreadsheet safety follows the OWASP guidance on CSV injection; atomic writes and
reruns are checked by interrupting a run.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import os
import uuid
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from roamstat.cli import main

HOSTILE = Path(__file__).resolve().parent / "fixtures" / "hostile"
EXPECTED = pd.read_csv(HOSTILE / "EXPECTED.csv", dtype=str, keep_default_na=False)
RUN_FAST = ["--replicates", "19", "--no-report"]
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")  # OWASP CSV injection: characters that start a formula


def cli(*args) -> tuple[int, str]:
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        code = main([str(a) for a in args])
    return code, err.getvalue()


def check_outcome(code: int, err: str, path: Path, out: Path) -> dict | None:
    """The hardening contract; returns the manifest of a successful run."""
    assert code in (0, 2), f"{path.name}: exit {code}: {err}"
    assert "Traceback" not in err
    if code == 2:
        lines = [line for line in err.splitlines() if line.strip()]
        assert len(lines) == 1, err
        assert lines[0].startswith("roamstat: error: ")
        assert path.name in lines[0]
        return None
    manifest = json.loads((out / "manifest.json").read_text())
    rows = manifest["rows"]
    assert rows["read"] == rows["kept"] + rows["rejected"]
    fixes = pd.read_csv(out / "fixes.csv", dtype=str, keep_default_na=False)
    rejected = pd.read_csv(out / "rejected.csv", dtype=str, keep_default_na=False)
    observed = fixes[fixes["interpolated"].str.lower() != "true"] if "interpolated" in fixes else fixes
    assert len(observed) == rows["kept"]
    assert len(rejected) == rows["rejected"]
    if path.suffix == ".gpx":
        return manifest  # GPX source_row is the <trkpt> line, shared by points written on one line
    # Every input line that was read appears exactly once, kept or rejected.
    seen = list(observed["source_row"]) + list(rejected["source_row"])
    assert len(set(zip(list(observed["source_file"]) + list(rejected["source_file"]), seen))) == rows["read"]
    return manifest


@pytest.mark.parametrize("name, command, expected", list(EXPECTED[["file", "command", "exit"]].itertuples(index=False)),
                         ids=list(EXPECTED["file"]))
def test_corpus_file_has_its_expected_outcome(name, command, expected, tmp_path):
    path, out = HOSTILE / name, tmp_path / "out"
    code, err = cli(command, path, "--out", out, "--quiet", *(RUN_FAST if command == "run" else []))
    check_outcome(code, err, path, out)
    assert code == int(expected), err
    if code == 0 and command == "run":
        check_insufficient_has_reasons(out)


def check_insufficient_has_reasons(out: Path) -> pd.DataFrame:
    tests = pd.read_csv(out / "null_tests.csv", dtype=str, keep_default_na=False)
    short = tests[tests["verdict"] == "insufficient"]
    assert (short["note"].str.len() > 0).all()
    return tests


@pytest.mark.parametrize("name, animals", [("one_fix_animals.csv", {f"solo{i}" for i in range(5)}),
                                           ("two_fix_animals.csv", {f"pair{i}" for i in range(5)}),
                                           ("stationary_animal.csv", {"still"})])
def test_tracks_too_short_or_still_are_insufficient_not_a_crash(name, animals, tmp_path):
    out = tmp_path / "out"
    code, err = cli("run", HOSTILE / name, "--out", out, "--quiet", *RUN_FAST)
    assert code == 0, err
    tests = check_insufficient_has_reasons(out)
    mine = tests[tests["animal_id"].isin(animals)]
    assert set(mine["animal_id"]) == animals
    assert (mine["verdict"] == "insufficient").all()


def write_tiny_animals(path: Path, n_animals: int) -> int:
    lines = ["animal_id,timestamp,lat,lon"]
    for i in range(n_animals):
        for j in range(1 + i % 2):  # one or two fixes each
            lines.append(f"t{i},2024-05-01T0{j}:00:00Z,{60 + i / 1000:.4f},{10 + (i + j) / 1000:.4f}")
    path.write_text("\n".join(lines) + "\n")
    return len(lines) - 1


def test_thousands_of_tiny_animals_steps(tmp_path):
    path, out = tmp_path / "tiny.csv", tmp_path / "out"
    n = write_tiny_animals(path, 3000)
    code, err = cli("steps", path, "--out", out, "--quiet")
    manifest = check_outcome(code, err, path, out)
    assert code == 0 and manifest["rows"]["read"] == n
    assert len(pd.read_csv(out / "summary.csv")) == 3000


def test_hundreds_of_tiny_animals_run(tmp_path):
    path, out = tmp_path / "tiny.csv", tmp_path / "out"
    write_tiny_animals(path, 300)
    code, err = cli("run", path, "--out", out, "--quiet", *RUN_FAST)
    check_outcome(code, err, path, out)
    assert code == 0
    tests = check_insufficient_has_reasons(out)
    assert tests["animal_id"].nunique() == 300 and (tests["verdict"] == "insufficient").all()


def test_a_100_kb_id_never_reaches_the_file_system(tmp_path):
    big = "x" * 100_000
    path, out = tmp_path / "big.csv", tmp_path / "out"
    path.write_text("animal_id,timestamp,lat,lon\n" + "".join(
        f"{big},2024-05-01T{i // 60:02d}:{i % 60:02d}:00Z,{61 + 0.001 * i * (i % 3 - 1):.4f},{10 + 0.001 * i:.4f}\n"
        for i in range(30)))
    code, err = cli("run", path, "--out", out, "--quiet", "--replicates", "19")
    check_outcome(code, err, path, out)
    assert code == 0
    assert all(len(p.name) < 120 for p in out.rglob("*"))  # names are slugs plus a short hash
    assert pd.read_csv(out / "summary.csv")["animal_id"].iloc[0] == big  # but the tables keep the id


def test_nothing_is_written_outside_out_and_inputs_are_untouched(tmp_path, monkeypatch):
    work = tmp_path / "work"
    work.mkdir()
    source = work / "ids.csv"
    source.write_bytes((HOSTILE / "path_ids.csv").read_bytes())
    before = source.read_bytes()
    monkeypatch.chdir(work)
    code, err = cli("run", source, "--out", work / "out", "--quiet", "--replicates", "19")
    assert code == 0, err
    assert sorted(p.name for p in work.iterdir()) == ["ids.csv", "out"]
    assert source.read_bytes() == before
    for p in (work / "out").rglob("*"):
        assert p.resolve().is_relative_to((work / "out").resolve())
    figures = [p.name for p in (work / "out" / "figures").iterdir()]
    assert figures and not any(".." in name or "/" in name or "\\" in name for name in figures)


def is_number(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return True


def test_every_text_cell_in_every_csv_output_is_spreadsheet_safe(tmp_path):
    out = tmp_path / "out"
    code, err = cli("run", HOSTILE / "formula_ids.csv", "--out", out, "--quiet", *RUN_FAST)
    assert code == 0, err
    negative_numbers = 0
    for table in out.glob("*.csv"):
        with table.open(newline="", encoding="utf-8") as fh:
            for row in csv.reader(fh):
                for cell in row:
                    if is_number(cell):
                        negative_numbers += cell.startswith("-")
                        continue
                    assert not cell.startswith(FORMULA_START), f"{table.name}: {cell!r}"
    assert negative_numbers > 0  # numbers stay numbers: negative turning angles are written bare
    ids = set(pd.read_csv(out / "summary.csv", dtype=str)["animal_id"])
    assert "'@SUM(1+1)" in ids and "'-2+3" in ids


def test_interrupted_run_leaves_no_half_table_and_a_rerun_gives_the_same_tables(tmp_path, monkeypatch):
    path = HOSTILE / "unsorted_rows.csv"
    clean = tmp_path / "clean"
    assert cli("steps", path, "--out", clean, "--quiet")[0] == 0
    real_replace = os.replace

    def interrupted(src, dst, *args, **kwargs):
        if Path(dst).name == "steps.csv":
            raise KeyboardInterrupt  # the user presses Ctrl-C while steps.csv is being written
        return real_replace(src, dst, *args, **kwargs)

    out = tmp_path / "out"
    monkeypatch.setattr(os, "replace", interrupted)
    code, err = cli("steps", path, "--out", out, "--quiet")
    monkeypatch.setattr(os, "replace", real_replace)
    assert code == 130 and "stopped by SIGINT" in err and "complete" not in err
    assert not out.exists()  # a stopped first run leaves no folder, and nothing beside it
    assert os.listdir(tmp_path) == ["clean"]
    assert cli("steps", path, "--out", out, "--quiet")[0] == 0  # rerun into the same folder
    for name in ("fixes.csv", "rejected.csv", "steps.csv", "summary.csv"):
        assert (out / name).read_bytes() == (clean / name).read_bytes()
    (out / "summary.csv").unlink()  # a lost output is simply written again
    assert cli("steps", path, "--out", out, "--quiet")[0] == 0
    assert (out / "summary.csv").read_bytes() == (clean / "summary.csv").read_bytes()


# --- fuzz: random CSV-like bytes -----------------------------------------------------------------

TOKENS = [b"animal_id", b"timestamp", b"lat", b"lon", b"hdop", b"id", b"time", b",", b";", b"\t", b"\n", b"\r\n",
          b"\r", b'"', b'""', b" ", b"a1", b"b2", b"=cmd", b"@x", b"-", b"61.1", b"10.4", b"-33.5", b"0", b"1e400",
          b"nan", b"inf", b"2024-05-01T00:00:00Z", b"2024-05-01T0:30:00+02:00", b"2024-05-02", b"1714521600",
          b"\xef\xbb\xbf", b"\xff\xfe", b"\xe9", b"\xc3\xa9", b"\x00", b"<?xml", b"<gpx>", b"<!DOCTYPE"]
HEADERS = [b"animal_id,timestamp,lat,lon\n", b"animal_id;timestamp;lat;lon\n", b"id\ttime\tlat\tlon\r\n", b""]


@st.composite
def csv_like_bytes(draw):
    header = draw(st.sampled_from(HEADERS))
    body = b"".join(draw(st.lists(st.one_of(st.sampled_from(TOKENS), st.binary(max_size=4)), max_size=80)))
    return header + body


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=csv_like_bytes())
def test_fuzz_random_csv_like_bytes_keep_the_contract(tmp_path, data):
    case = tmp_path / uuid.uuid4().hex
    case.mkdir()
    path, out = case / "fuzz.csv", case / "out"
    path.write_bytes(data)
    code, err = cli("steps", path, "--out", out, "--quiet")
    check_outcome(code, err, path, out)

"""The output folder is always one true run: staging and swap, the lock, clean stops, symlinks, system errors.

"One true run" (common practice for data tools, no source): the folder's manifest.json lists
exactly the files present, each with the sha256 of its bytes (checked here with hashlib, outside
the program), and nothing else from another run or command is there.  Runs are stopped at random
moments with SIGKILL, SIGINT and SIGTERM through real subprocesses on the sample deployment.
"""

from __future__ import annotations

import hashlib
import json
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from roamstat import run as run_module
from roamstat.cli import main
from roamstat.errors import RoamstatError, Stopped
from roamstat.outdir import OutputFolder
from roamstat.spill import SpillFile

FAST = ["--replicates", "19", "--quiet"]


@pytest.fixture
def small(sample_csv, tmp_path) -> Path:
    """400 fixes of one sample animal: a full run with its report takes a few seconds."""
    lines = sample_csv.read_text().splitlines(keepends=True)
    first = lines[1].split(",", 1)[0]
    keep = [line for line in lines[1:] if line.split(",", 1)[0] == first][:400]
    folder = tmp_path / "in"
    folder.mkdir()
    path = folder / "two.csv"
    path.write_text(lines[0] + "".join(keep))
    return path


def cli(*args) -> tuple[int, str]:
    proc = subprocess.run([sys.executable, "-m", "roamstat", *map(str, args)], capture_output=True, text=True,
                          timeout=120)
    return proc.returncode, proc.stderr


def one_true_run(out: Path) -> dict:
    """The manifest, after checking it lists exactly the files present with their sha256."""
    manifest = json.loads((out / "manifest.json").read_text())
    listed = {e["path"]: e["sha256"] for e in manifest["files"] + manifest.get("kept_files", [])}
    present = {p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file() and p.name != "manifest.json"}
    assert set(listed) == present
    for rel, digest in listed.items():
        assert hashlib.sha256((out / rel).read_bytes()).hexdigest() == digest, rel
    return manifest


def children(pid: int) -> list[int]:
    found = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:
            found.append(int(stat.parent.name))
    return found


def gone(pids: list[int], within_s: float = 10.0) -> bool:
    deadline = time.monotonic() + within_s
    while time.monotonic() < deadline:
        if not [p for p in pids if Path(f"/proc/{p}").exists() and "Z" not in _state(p)]:
            return True
        time.sleep(0.1)
    return False


def _state(pid: int) -> str:
    try:
        return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return "Z"


@pytest.mark.slow
@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGINT, signal.SIGTERM])
def test_run_stopped_at_random_moments_leaves_one_true_run_and_no_workers(sig, small, tmp_path):
    outs = tmp_path / "outs"
    out = outs / "o"
    assert cli("clean", small, "--out", out, "--quiet")[0] == 0
    rng = np.random.default_rng(int(sig))
    stopped = []
    # First mid-run (just after the staging folder appears, in a run made long by 999 replicates, so a
    # fast machine cannot finish first); then anywhere from start-up to the swap.
    for mid_run, delay, replicates in ((True, rng.uniform(0.2, 1.0), "999"), (False, rng.uniform(0.5, 6.0), "19")):
        proc = subprocess.Popen([sys.executable, "-m", "roamstat", "run", str(small), "--out", str(out), "--quiet",
                                 "--replicates", replicates, "--workers", "2"], stderr=subprocess.PIPE, text=True,
                                preexec_fn=_default_sigint)
        if mid_run:
            assert _appears(outs, ".o.roamstat-new-", proc), "the run never created its staging folder"
        time.sleep(delay)
        workers = children(proc.pid)
        proc.send_signal(sig)
        _, err = proc.communicate(timeout=30)
        stopped.append(proc.returncode != 0)
        if proc.returncode == 128 + sig:  # (-sig: stopped while Python was still starting, before roamstat ran)
            assert f"stopped by {signal.Signals(sig).name}" in err
            assert "complete" not in err  # never claims outputs are complete
        else:
            assert proc.returncode in (0, -sig), err
        assert gone(workers), "worker processes outlived the run"
        if sig == signal.SIGKILL:
            with OutputFolder(out, [], force=False):  # the next run's lock clears what the killed one left
                pass
        assert one_true_run(out)["command"] in {"clean", "run"}
        assert sorted(p.name for p in outs.iterdir()) == ["o"]  # no staging, old run or lock left beside it
    assert stopped[0]  # the first stop comes mid-run, so the test cannot pass by the run simply finishing


def _appears(folder: Path, prefix: str, proc: subprocess.Popen, within_s: float = 60.0) -> bool:
    """Wait until an entry named ``prefix…`` appears in ``folder`` (while ``proc`` runs)."""
    deadline = time.monotonic() + within_s
    while time.monotonic() < deadline and proc.poll() is None:
        if any(p.name.startswith(prefix) for p in folder.iterdir()):
            return True
        time.sleep(0.02)
    return False


def _default_sigint() -> None:
    """A child started from a background job inherits an ignored Ctrl-C; give it the terminal's default."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


@pytest.mark.slow
def test_low_memory_masked_run_killed_leaves_no_raw_coordinates_on_disk(small, tmp_path):
    outs = tmp_path / "outs"
    raw = [line.split(",")[2] for line in small.read_text().splitlines()[1:200]]  # latitudes as written
    proc = subprocess.Popen([sys.executable, "-m", "roamstat", "steps", str(small), "--out", str(outs / "o"),
                             "--low-memory", "--mask-locations", "--quiet"])
    time.sleep(2.5)
    proc.kill()
    proc.wait(timeout=10)
    for path in outs.rglob("*") if outs.exists() else []:
        if path.is_file():
            text = path.read_text(errors="replace")
            assert not any(value in text for value in raw), path


def test_second_run_into_the_same_folder_refuses_at_once(sample_csv, small, tmp_path):
    out = tmp_path / "o"
    first = subprocess.Popen([sys.executable, "-m", "roamstat", "run", str(sample_csv), "--out", str(out),
                              "--replicates", "999", "--quiet"], stderr=subprocess.PIPE, text=True)
    lock = tmp_path / ".o.roamstat-lock"
    deadline = time.monotonic() + 30
    while not lock.exists() and time.monotonic() < deadline:
        time.sleep(0.05)
    code, err = cli("clean", small, "--out", out, "--quiet")
    assert code == 2 and err.startswith("roamstat: error:") and "another roamstat run" in err
    assert f"pid {first.pid}" in err
    first.send_signal(signal.SIGTERM)  # the long first run is stopped: its lock and staging go with it
    assert first.wait(timeout=30) == 128 + signal.SIGTERM
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in"]


def test_stale_lock_from_a_dead_process_is_cleared(small, tmp_path, capsys):
    dead = subprocess.Popen(["true"])
    dead.wait()
    lock = tmp_path / ".o.roamstat-lock"
    lock.write_text(f"{dead.pid} {socket.gethostname()}\n")
    assert main(["clean", str(small), "--out", str(tmp_path / "o"), "--quiet"]) == 0
    assert not lock.exists()
    lock.write_text("4242 some-other-host\n")  # a process elsewhere cannot be checked: refuse, say how to clear
    assert main(["clean", str(small), "--out", str(tmp_path / "o"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "some-other-host" in err and str(lock) in err


def test_each_command_replaces_the_earlier_outputs_and_foreign_files_need_force(small, tmp_path, capsys):
    out = tmp_path / "o"
    assert main(["steps", str(small), "--out", str(out), "--quiet"]) == 0
    assert main(["clean", str(small), "--out", str(out), "--quiet"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["fixes.csv", "manifest.json", "rejected.csv"]
    (out / "notes.txt").write_text("field notes")
    assert main(["clean", str(small), "--out", str(out), "--quiet"]) == 2
    assert "--force" in capsys.readouterr().err
    assert main(["steps", str(small), "--out", str(out), "--quiet", "--force"]) == 0
    assert (out / "notes.txt").read_text() == "field notes"  # --force keeps the user's files, unchanged
    manifest = one_true_run(out)
    assert [e["path"] for e in manifest["kept_files"]] == ["notes.txt"]
    assert "steps.csv" in {e["path"] for e in manifest["files"]}


def test_symlinks_inside_out_are_never_followed(small, tmp_path):
    out, outside = tmp_path / "o", tmp_path / "elsewhere"
    outside.mkdir()
    (outside / "keep.csv").write_text("untouched")
    assert main(["clean", str(small), "--out", str(out), "--quiet"]) == 0
    (out / "figures").symlink_to(outside, target_is_directory=True)
    (out / "fixes.csv").unlink()
    (out / "fixes.csv").symlink_to(outside / "keep.csv")
    assert main(["run", str(small), "--out", str(out), *FAST]) == 0
    assert sorted(p.name for p in outside.iterdir()) == ["keep.csv"]  # nothing written through the links
    assert (outside / "keep.csv").read_text() == "untouched"
    assert (out / "figures").is_dir() and not (out / "figures").is_symlink()
    assert not (out / "fixes.csv").is_symlink()
    assert one_true_run(out)["command"] == "run"


def test_out_through_a_file_is_a_clear_error_before_any_computing(small, tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(run_module, "load", lambda *a, **k: pytest.fail("computed before checking --out"))
    (tmp_path / "file.txt").write_text("x")
    assert main(["clean", str(small), "--out", str(tmp_path / "file.txt" / "sub"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("roamstat: error:") and "not a folder" in err and "Traceback" not in err


@pytest.mark.parametrize("stop, code", [(KeyboardInterrupt(), 128 + signal.SIGINT),
                                         (Stopped(signal.SIGTERM), 128 + signal.SIGTERM)])
def test_a_stop_inside_compiled_code_is_a_stop_not_a_bug(small, tmp_path, monkeypatch, capsys, stop, code):
    # A signal landing in a numba kernel surfaces as SystemError("... returned a result with an
    # exception set") caused by the KeyboardInterrupt (seen in CI under SIGINT).
    def compiled_code_stopped(*args, **kwargs):
        raise SystemError("returned a result with an exception set") from stop
    monkeypatch.setattr(run_module, "load", compiled_code_stopped)
    assert main(["clean", str(small), "--out", str(tmp_path / "o"), "--quiet"]) == code
    err = capsys.readouterr().err
    assert "stopped by" in err and "internal error" not in err


@pytest.fixture
def tiny_fs(tmp_path):
    """A 1 MB tmpfs (needs root and permission to mount; skipped clearly otherwise)."""
    mnt = tmp_path / "mnt"
    mnt.mkdir()
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(mnt)], capture_output=True).returncode:
        pytest.skip("cannot mount a small tmpfs here (needs root); full-disk and read-only cases not exercised")
    try:
        yield mnt
    finally:
        subprocess.run(["umount", "-l", str(mnt)], check=False)


def test_full_disk_and_read_only_folder_keep_the_earlier_run(small, sample_csv, tiny_fs, monkeypatch, capsys):
    out = tiny_fs / "o"
    assert main(["clean", str(small), "--out", str(out), "--quiet"]) == 0
    before = one_true_run(out)
    assert main(["steps", str(sample_csv), "--out", str(out), "--quiet"]) == 2  # about 2 MB of tables: no space
    err = capsys.readouterr().err
    assert err.startswith("roamstat: error:") and "space" in err and "internal error" not in err
    assert one_true_run(out) == before
    assert sorted(p.name for p in tiny_fs.iterdir()) == ["o"]
    subprocess.run(["mount", "-o", "remount,ro", str(tiny_fs)], check=True)
    monkeypatch.setattr(run_module, "load", lambda *a, **k: pytest.fail("computed before checking --out"))
    assert main(["clean", str(small), "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("roamstat: error:") and "read-only" in err
    assert one_true_run(out) == before


def test_a_failed_command_leaves_no_new_folder(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text("a,b\n1,2\n")
    assert main(["steps", str(bad), "--out", str(tmp_path / "o"), "--quiet"]) == 2
    assert main(["steps", str(bad), "--out", str(tmp_path / "new" / "deeper" / "o"), "--quiet"]) == 2
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.csv"]


def test_an_interrupted_swap_is_undone_by_the_next_lock(small, tmp_path):
    out = tmp_path / "o"
    assert main(["clean", str(small), "--out", str(out), "--quiet"]) == 0
    before = one_true_run(out)
    os.rename(out, tmp_path / ".o.roamstat-old-999999")  # SIGKILL between the swap's two renames
    (tmp_path / ".o.roamstat-new-999999").mkdir()
    with OutputFolder(out, [], force=False) as folder:
        assert one_true_run(out) == before
        assert folder.staging.is_dir()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in", "o"]


def test_spill_file_has_no_name_and_is_enciphered_when_masking(tmp_path):
    marker = "55.394938,-3.673179"
    for encrypt in (False, True):
        spill = SpillFile(tmp_path, encrypt=encrypt)
        where = spill.put({"row": marker})
        assert os.listdir(tmp_path) == []  # nothing on disk has a name
        stored = os.pread(spill._file.fileno(), where[1], where[0])
        assert (marker.encode() in stored) is not encrypt  # plain without masking, enciphered with it
        assert spill.get(where) == {"row": marker}
        spill.close()


def test_folder_checks_happen_before_the_lock(tmp_path):
    with pytest.raises(RoamstatError, match="one of the input files"):
        OutputFolder(tmp_path / "x.csv", [tmp_path / "x.csv"], force=False)

"""The output folder as one unit: a lock, a staging folder and a swap.

A command never writes into ``--out`` itself.  It takes a lock next to the
folder (``.<name>.roamstat-lock`` in the parent, created with ``O_EXCL``,
holding ``pid host``), writes every output into a staging folder beside it
(``.<name>.roamstat-new-<pid>``, same filesystem), and only when everything
is written swaps it in: the old folder is renamed aside
(``.<name>.roamstat-old-<pid>``), the staging folder renamed to ``--out``,
the user's own files carried over, and the old run removed.  Whatever stops
the command, ``--out`` then holds one whole run: the earlier one or the new
one.  A SIGKILL between the two renames leaves the earlier run aside; the
next command into the folder (holding the lock) puts it back first.

Common practice for trusted data tools (write-then-rename, lock files with
the holder's pid), no single source.
"""

from __future__ import annotations

import errno
import os
import shutil
import signal
import socket
import time
from contextlib import contextmanager, suppress
from pathlib import Path

from roamstat.errors import RoamstatError
from roamstat.manifest import MANIFEST

#: Everything a roamstat command may leave in its folder.
OUTPUT_NAMES = {f"{stem}.{ext}" for stem in ("fixes", "rejected", "steps", "summary", "fits", "null_tests",
                                             "residency", "ranges") for ext in ("csv", "parquet")} | \
    {"ranges.geojson", "report.html", "figures", MANIFEST}

_LOCK, _NEW, _OLD = ".roamstat-lock", ".roamstat-new-", ".roamstat-old-"
_STALE_EMPTY_LOCK_S = 10.0  # a lock file still empty after this long lost its writer


def is_roamstat_output(name: str) -> bool:
    """A name a roamstat command writes (or a leftover of an older version's interrupted run)."""
    return name in OUTPUT_NAMES or (name.startswith(".") and name.endswith(".part")) or name.startswith(".spill-")


class OutputFolder:
    """Lock ``out``, hand out a staging folder, and swap it in on :meth:`commit`.

    Leaving the ``with`` block without a commit (an error, Ctrl-C, SIGTERM)
    removes the staging folder and leaves ``out`` as it was.  Files in
    ``out`` that no roamstat command writes ("foreign" files) make the
    command refuse unless ``force``; with ``force`` they are carried over,
    unchanged, into the new folder (no data silently lost).  Symbolic links
    inside ``out`` are never followed: one with an output's name is dropped
    with the earlier run, any other is carried over as a link.
    """

    def __init__(self, out, inputs, force: bool) -> None:
        out = Path(out)
        if out.is_symlink() and out.is_dir():
            out = out.resolve()  # the folder the user named, wherever it lives; its parent holds the swap
        self.out, self.parent, self.force = out, out.parent, force
        self.staging = self.parent / f".{out.name}{_NEW}{os.getpid()}"
        self.lock = self.parent / f".{out.name}{_LOCK}"
        self.foreign: list[str] = []
        self._locked = self._committed = False
        self._made: list[Path] = []
        resolved_inputs = {Path(p).resolve() for p in inputs}
        if out.resolve() in resolved_inputs:
            raise RoamstatError(f"--out {out} is one of the input files; choose a new folder for the outputs")
        if os.path.lexists(out) and not out.is_dir():
            raise RoamstatError(f"--out {out} exists and is not a folder; choose a new folder for the outputs")

    def __enter__(self) -> OutputFolder:
        with system_errors(self.out):
            self._made = [p for p in (self.parent, *self.parent.parents) if not os.path.lexists(p)]
            self.parent.mkdir(parents=True, exist_ok=True)
            self._check_writable()
            self._acquire()
            try:
                self._recover()
                self.foreign = self._foreign_entries()
                if self.foreign and not self.force:
                    raise RoamstatError(
                        f"--out {self.out} holds files roamstat did not write ({_listed(self.foreign)}); each "
                        "command replaces the folder's earlier roamstat outputs, so choose a new or empty folder, "
                        "or add --force to keep those files beside the new outputs")
                self.staging.mkdir()
            except BaseException:
                self.__exit__()
                raise
        return self

    def __exit__(self, *exc) -> None:
        try:
            if not self._committed:
                shutil.rmtree(self.staging, ignore_errors=True)
        finally:
            self._release()
        if not self._committed:
            for folder in self._made:  # a failed command leaves no new folder, parents included
                with suppress(OSError):
                    folder.rmdir()

    # --- the swap -------------------------------------------------------------------------------

    def commit(self) -> None:
        """Swap the staging folder in as ``out`` (signals held back for the few renames)."""
        old = self.parent / f".{self.out.name}{_OLD}{os.getpid()}"
        with _signals_held(), system_errors(self.out):
            had_old = os.path.lexists(self.out)
            if had_old:
                os.rename(self.out, old)
            try:
                os.rename(self.staging, self.out)
            except BaseException:
                if had_old:
                    os.rename(old, self.out)
                raise
            self._committed = True
            if had_old:
                _carry_foreign(old, self.out)
                shutil.rmtree(old, ignore_errors=True)

    # --- checks, lock and leftovers -------------------------------------------------------------

    def _check_writable(self) -> None:
        for folder in (self.parent, self.out):
            if folder.is_dir() and not os.access(folder, os.W_OK | os.X_OK):
                raise RoamstatError(f"--out {self.out}: cannot write in {folder} (read-only or no permission); "
                                    "make it writable or choose another --out")

    def _acquire(self) -> None:
        for _ in range(2):
            try:
                fd = os.open(self.lock, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o644)
            except FileExistsError:
                holder = _lock_holder(self.lock)
                if holder is not None:
                    raise RoamstatError(
                        f"--out {self.out} is being written by another roamstat run ({holder}); wait for it to "
                        f"finish or choose another --out (if no such run exists, delete {self.lock})") from None
                self.lock.unlink(missing_ok=True)  # its process is gone
                continue
            with os.fdopen(fd, "w") as fh:
                fh.write(f"{os.getpid()} {socket.gethostname()}\n")
            self._locked = True
            return
        raise RoamstatError(f"--out {self.out}: another run keeps taking the lock {self.lock}; try again")

    def _release(self) -> None:
        if self._locked:
            self.lock.unlink(missing_ok=True)
            self._locked = False

    def _recover(self) -> None:
        """Clear what a killed run left beside ``out`` (we hold the lock, so nobody is using it)."""
        for old in sorted(self.parent.glob(f".{self.out.name}{_OLD}*")):
            if not os.path.lexists(self.out):
                os.rename(old, self.out)  # killed mid-swap: the earlier run comes back
            else:
                _carry_foreign(old, self.out)  # killed after the swap: finish it
                shutil.rmtree(old, ignore_errors=True)
        for new in self.parent.glob(f".{self.out.name}{_NEW}*"):
            shutil.rmtree(new, ignore_errors=True)

    def _foreign_entries(self) -> list[str]:
        if not self.out.is_dir():
            return []
        return sorted(p.name for p in self.out.iterdir() if not is_roamstat_output(p.name))


def _carry_foreign(old: Path, new: Path) -> None:
    for entry in old.iterdir():
        if not is_roamstat_output(entry.name) and not os.path.lexists(new / entry.name):
            os.rename(entry, new / entry.name)  # a rename moves a link itself, never its target


def _listed(names: list[str]) -> str:
    return ", ".join(names[:3]) + (f" and {len(names) - 3} more" if len(names) > 3 else "")


def _lock_holder(lock: Path) -> str | None:
    """Who holds ``lock`` ("pid N on HOST"), or None when the lock is stale."""
    try:
        text = lock.read_text().split()
        age = _age_s(lock)
    except FileNotFoundError:
        return None
    if len(text) != 2 or not text[0].isdigit():
        return None if age > _STALE_EMPTY_LOCK_S else "a run starting now"
    pid, host = int(text[0]), text[1]
    if host != socket.gethostname():
        return f"pid {pid} on {host}"  # cannot check a process on another machine
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return None
    except PermissionError:
        pass  # alive, owned by someone else
    return f"pid {pid} on {host}"


def _age_s(path: Path) -> float:
    return time.time() - path.stat().st_mtime


@contextmanager
def _signals_held():
    held = {signal.SIGINT, signal.SIGTERM}
    previous = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, previous)


_ADVICE = {
    errno.ENOSPC: "free some space or choose an --out on another disk",
    errno.EDQUOT: "free some space (disk quota exceeded) or choose an --out on another disk",
    errno.EROFS: "the filesystem is read-only; choose an --out on a writable disk",
    errno.EACCES: "no permission; make the folder writable or choose another --out",
    errno.EPERM: "not permitted; make the folder writable or choose another --out",
    errno.ENOTDIR: "a part of the path is a file, not a folder; choose another --out",
    errno.EEXIST: "a part of the path is a file, not a folder; choose another --out",
    errno.EFBIG: "the file grew too large for this filesystem; choose an --out on another disk",
}


def _under(filename, folder: Path) -> bool:
    """True for an error about ``folder`` or a path inside it (or about no path: a full disk on write)."""
    if filename is None:
        return True
    try:
        return Path(os.path.abspath(filename)).is_relative_to(os.path.abspath(folder))
    except (TypeError, ValueError):
        return False


@contextmanager
def system_errors(out: Path):
    """Turn the operating system's refusals (space, permission, path) into one-line user errors."""
    try:
        yield
    except OSError as exc:
        if exc.errno not in _ADVICE or not _under(exc.filename, out.parent):
            raise
        where = f" ({exc.filename})" if exc.filename else ""
        raise RoamstatError(f"--out {out}: {exc.strerror}{where}; {_ADVICE[exc.errno]}; "
                            "the folder keeps its earlier run, if it had one") from None

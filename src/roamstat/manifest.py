"""The manifest (everything needed to reproduce a run) and the run facts the report shows."""

from __future__ import annotations

import hashlib
import os
import platform
import sys
from importlib import metadata
from pathlib import Path

from roamstat import __version__
from roamstat.config import Config
from roamstat.pipeline import Loaded

MANIFEST = "manifest.json"
_HASH_BLOCK = 1 << 20


def visible_projections(loaded: Loaded, cfg: Config) -> dict:
    """Per-animal frames, or a placeholder when masking (each frame is centred on a real fix)."""
    if cfg.mask_locations:
        return {aid: "hidden (--mask-locations)" for aid in loaded.projections}
    return loaded.projections


def run_info(loaded: Loaded, cfg: Config, argv) -> dict:
    """The facts of the run shown in the report's header."""
    return {
        "version": __version__,
        "command_line": " ".join(argv or []),
        "seed": cfg.seed,
        "n_read": loaded.read.n_read,
        "n_kept": loaded.n_kept(),
        "n_rejected": int(len(loaded.rejected)),
        "projections": visible_projections(loaded, cfg),
        "masked": cfg.mask_locations,
        "inputs": [f["path"] for f in loaded.read.files],
    }


def package_versions() -> dict:
    names = ["numpy", "pandas", "scipy", "pyproj", "matplotlib", "shapely", "tqdm", "pyarrow", "dask", "distributed"]
    versions = {}
    for name in names:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    return versions


def build_manifest(command: str, loaded: Loaded, cfg: Config, argv, stages: list[dict], duration_s: float) -> dict:
    """Everything needed to reproduce the run (never the hidden origin of a masked run)."""
    read = loaded.read
    return {
        "roamstat": __version__,
        "command": command,
        "command_line": ["roamstat", *(argv or [])],
        "parameters": cfg.as_dict(),
        "seed": cfg.seed,
        "inputs": [{k: f[k] for k in ("path", "size_bytes", "sha256", "encoding", "delimiter", "columns", "n_rows", "notes") if k in f}
                   for f in read.files],
        "time_zone_of_naive_times": read.tz_note,
        "rows": {"read": read.n_read, "kept": loaded.n_kept(), "rejected": int(len(loaded.rejected))},
        "rejected_by_reason": {str(k): int(v) for k, v in loaded.rejected["reason_code"].value_counts().sort_index().items()}
        if len(loaded.rejected) else {},
        "projections": visible_projections(loaded, cfg),
        "python": platform.python_version(),
        "platform": platform.platform(),
        "packages": package_versions(),
        "stages": stages,
        "duration_s": round(duration_s, 3),
        "executable": sys.executable,
    }


def folder_files(folder: Path, names=None) -> list[dict]:
    """Every regular file under ``folder`` (or under its entries ``names``) but the manifest, with size and sha256.

    Paths are relative, with ``/``; symbolic links are listed as links, never followed.
    """
    folder = Path(folder)
    tops = [folder / n for n in names] if names is not None else [folder]
    found = []
    for top in tops:
        if top.is_symlink() or top.is_file():
            found.append(top)
            continue
        for root, dirs, files in os.walk(top):  # os.walk does not descend into linked folders
            found += [Path(root) / f for f in files] + [Path(root) / d for d in dirs if (Path(root) / d).is_symlink()]
    entries = []
    for path in sorted(found):
        rel = path.relative_to(folder).as_posix()
        if rel == MANIFEST:
            continue
        if path.is_symlink():
            entries.append({"path": rel, "symlink_to": os.readlink(path)})
        else:
            entries.append({"path": rel, "size_bytes": path.stat().st_size, "sha256": file_sha256(path)})
    return entries


def file_sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(_HASH_BLOCK):
            digest.update(block)
    return digest.hexdigest()


def outcome_manifest(command: str, cfg: Config, argv, outcome: str) -> dict:
    """The manifest of a command that stopped with a user error but still wrote a table (rejected.csv)."""
    return {"roamstat": __version__, "command": command, "command_line": ["roamstat", *(argv or [])],
            "parameters": cfg.as_dict(), "seed": cfg.seed, "outcome": outcome}

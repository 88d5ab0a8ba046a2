"""Scratch storage for ``--low-memory`` runs that cannot outlive the run.

Every spilled part goes into ONE anonymous file: created in the staging
folder and unlinked at once (``O_TMPFILE`` where the filesystem has it), so
it has no name on disk and the kernel frees it when the process ends, even
after SIGKILL.  With ``--mask-locations`` each part is also enciphered
before it is written, XOR with a SHAKE-256 keystream (FIPS 202, 2015) drawn
from a random 256-bit key that lives only in this process's memory and a
per-part nonce (its offset), so raw coordinates never reach the disk in the
clear.
"""

from __future__ import annotations

import hashlib
import os
import pickle
import secrets
import tempfile
from pathlib import Path

import numpy as np


class SpillFile:
    """Append-only anonymous scratch file of pickled objects (optionally enciphered).

    Parameters
    ----------
    folder : Path
        Folder on the filesystem to use (the run's staging folder).
    encrypt : bool
        Encipher every part with a key held in memory only.
    """

    def __init__(self, folder: Path, encrypt: bool) -> None:
        self._file = tempfile.TemporaryFile(dir=folder)  # unlinked: no name, gone with the process
        self._key = secrets.token_bytes(32) if encrypt else None
        self._end = 0

    def put(self, obj) -> tuple[int, int]:
        """Store ``obj``; returns where it is, for :meth:`get`."""
        data = self._cipher(pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL), self._end)
        where = (self._end, len(data))
        os.pwrite(self._file.fileno(), data, self._end)
        self._end += len(data)
        return where

    def get(self, where: tuple[int, int]):
        offset, length = where
        return pickle.loads(self._cipher(os.pread(self._file.fileno(), length, offset), offset))

    def close(self) -> None:
        self._file.close()

    def _cipher(self, data: bytes, offset: int) -> bytes:
        if self._key is None:
            return data
        stream = hashlib.shake_256(self._key + offset.to_bytes(8, "little")).digest(len(data))
        return (np.frombuffer(data, np.uint8) ^ np.frombuffer(stream, np.uint8)).tobytes()

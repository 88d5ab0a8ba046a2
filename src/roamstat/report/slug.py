"""File-system-safe names for animal ids.

Animal ids are free text typed by people.  A figure file name must never carry
path separators, ``..``, device names reserved on Windows (``CON``, ``NUL``,
``COM1``...), control characters or a 100 kB string, and two distinct ids must
never share a file.  The name is a short ASCII slug of the id, for the reader,
plus a prefix of the SHA-256 of the exact id, for uniqueness.
"""

from __future__ import annotations

import hashlib
import re
import unicodedata

SLUG_CHARS = 40
HASH_CHARS = 8
_NOT_SLUG = re.compile(r"[^a-z0-9]+")


def _slug(animal_id: str) -> str:
    ascii_text = unicodedata.normalize("NFKD", animal_id).encode("ascii", "ignore").decode("ascii")
    slug = _NOT_SLUG.sub("-", ascii_text.lower()).strip("-")[:SLUG_CHARS].strip("-")
    return slug or "animal"


def _digest(animal_id: str) -> str:
    return hashlib.sha256(animal_id.encode("utf-8", "surrogatepass")).hexdigest()


def safe_name(animal_id: str, hash_chars: int = HASH_CHARS) -> str:
    """A short, safe, readable name for ``animal_id``.

    Parameters
    ----------
    animal_id : str
        The id exactly as read (any characters, any length).
    hash_chars : int
        How many hex characters of the SHA-256 of the id to append.

    Returns
    -------
    str
        ``<slug>-<hash>``: lower-case ASCII letters, digits and hyphens only,
        at most ``SLUG_CHARS + 1 + hash_chars`` characters.  Never empty,
        never starts with a dot, never a Windows device name (the hash suffix
        makes every name longer than those).
    """
    return f"{_slug(str(animal_id))}-{_digest(str(animal_id))[:hash_chars]}"


def safe_names(animal_ids) -> dict[str, str]:
    """Map every id to a safe name, distinct within the batch.

    Eight hex characters (32 bits) make a clash between two ids unlikely but,
    with thousands of animals, not impossible (birthday bound).  If one occurs
    the whole batch uses the full 64-character hash.
    """
    ids = list(dict.fromkeys(str(a) for a in animal_ids))
    names = {a: safe_name(a) for a in ids}
    if len(set(names.values())) < len(ids):
        names = {a: safe_name(a, hash_chars=64) for a in ids}
    return names

"""The result cache: one JSON file per checked netlist, validated on load.

An entry is plain data, never code: loading one builds only the result dataclasses the
codec (:mod:`drivelint.codec`) lists, field by field, each value checked against the
field's type. Anything unexpected —
a truncated or foreign file, a wrong type, an entry whose stored key is not the key asked
for, an input that changed — is a miss, never an error.

Entry format (``CACHE_FORMAT``): two lines, each a JSON document::

    {"format": 3, "key": "<sha256 of everything the result depends on>",
     "inputs": [["file", PATH, SHA256], ["lookup", CANDIDATE, RESOLVED or ""], ...],
     "brief": {<Brief, keyed by field name>}}
    [<CheckResult as [tag, field, field, ...]>]

A plain text report reads the first line alone, for the ``brief``
(:mod:`drivelint.report.brief`); every other format decodes the result on the second.

``inputs`` are what reading found besides the netlist itself: each file read (by content)
and each include lookup (by where it led, or that nothing was there), so a file created
where one was missing, a retargeted symbolic link or a shadowing search-path file all
miss.
"""

from __future__ import annotations

import hashlib
import json
import os
import stat
from pathlib import Path
from typing import Any

# The typed codec lives in drivelint.codec (the JSON report's records use it too).
from drivelint.codec import CodecError, decode_result, encode, prepare

__all__ = ["CacheFormatError", "decode_result", "encode", "prepare"]

CACHE_FORMAT = 3
# An entry larger than this is not read (a result is a few kB; a planted file could be huge).
MAX_ENTRY_BYTES = 16 * 1024 * 1024


CacheFormatError = CodecError  # an entry that does not hold what the format says


def default_cache_dir() -> Path:
    """drivelint's folder in the user cache directory of this platform."""
    import platformdirs

    return Path(platformdirs.user_cache_dir("drivelint", appauthor=False))


def private_folder(path: Path) -> bool:
    """Make ``path`` (mode 0700) if needed; True if it is a folder only this user can write.

    A cache folder someone else can write could serve them a planted answer; it is then
    not used at all.
    """
    try:
        path.mkdir(mode=0o700, parents=True, exist_ok=True)
        info = os.lstat(path)
    except OSError:
        return False
    if not stat.S_ISDIR(info.st_mode):
        return False
    if not hasattr(os, "getuid"):
        return True  # Windows: access is by ACL, which st_mode does not show
    if info.st_uid != os.getuid():
        return False
    return not info.st_mode & (stat.S_IWGRP | stat.S_IWOTH)


def digest(*parts: bytes) -> str:
    h = hashlib.sha256()
    for part in parts:
        h.update(len(part).to_bytes(8, "big"))
        h.update(part)
    return h.hexdigest()


# -- what an entry depends on ---------------------------------------------------------------


def file_digest(path: Path, max_bytes: int = 1 << 30) -> str:
    """The content digest of a regular file; "missing" when there is none to read."""
    from drivelint.netlist.reader import read_bounded

    data = read_bounded(path, max_bytes)
    return hashlib.sha256(data).hexdigest() if isinstance(data, bytes) else "missing"


def lookup_outcome(candidate: str) -> str:
    """Where an include lookup of ``candidate`` leads now ("" when nothing is there)."""
    path = Path(candidate)
    try:
        return str(path.resolve()) if path.exists() else ""
    except (OSError, ValueError, RuntimeError):  # RuntimeError: a symbolic-link loop
        return ""


def inputs_unchanged(inputs: object) -> bool:
    if not isinstance(inputs, list):
        return False
    for item in inputs:
        if not (isinstance(item, list) and len(item) == 3 and all(type(x) is str for x in item)):
            return False
        kind, path, value = item
        if kind == "file":
            if file_digest(Path(path)) != value:
                return False
        elif kind == "lookup":
            if lookup_outcome(path) != value:
                return False
        else:
            return False
    return True


# -- entries --------------------------------------------------------------------------------


def entry_path(folder: Path, key: str) -> Path:
    return folder / key[:2] / f"{key}.json"


def _entry(folder: Path, key: str) -> tuple[dict[str, Any], bytes] | None:
    """The header and the result line of the entry stored under ``key``, if the entry is
    whole, is for ``key``, and its inputs are unchanged; else None."""
    from drivelint.netlist.reader import read_bounded

    data = read_bounded(entry_path(folder, key), MAX_ENTRY_BYTES)
    if not isinstance(data, bytes):
        return None
    first, newline, rest = data.partition(b"\n")
    try:
        header = json.loads(first)
    except (ValueError, RecursionError):
        return None
    if (
        not newline
        or type(header) is not dict
        or header.get("format") != CACHE_FORMAT
        or header.get("key") != key
        or not inputs_unchanged(header.get("inputs"))
    ):
        return None
    return header, rest


def read_entry(folder: Path, key: str) -> Any | None:
    """The result stored under ``key`` (see :func:`_entry`), or None."""
    entry = _entry(folder, key)
    if entry is None:
        return None
    try:
        return decode_result(json.loads(entry[1]))
    except (ValueError, RecursionError):  # CacheFormatError is a ValueError
        return None


def read_brief(folder: Path, key: str) -> Any | None:
    """The brief stored under ``key`` (see :func:`_entry`), or None."""
    from drivelint.codec import from_fields
    from drivelint.report.brief import Brief

    entry = _entry(folder, key)
    if entry is None:
        return None
    try:
        return from_fields(Brief, entry[0].get("brief"))
    except (CacheFormatError, RecursionError):
        return None


def write_entry(
    folder: Path, key: str, inputs: list[tuple[str, str, str]], result: Any, brief: Any
) -> None:
    """Keep ``result`` and its ``brief`` under ``key``, atomically; a cache that cannot be
    written costs speed."""
    import tempfile

    from drivelint.codec import fields_json

    prepare()  # the encoder knows the classes the decoders were built for
    header = {
        "format": CACHE_FORMAT,
        "key": key,
        "inputs": [list(item) for item in inputs],
        "brief": fields_json(brief),
    }
    # ASCII (so no raw line break inside either line): a file name that is not UTF-8
    # (surrogate escapes) stays representable.
    text = "\n".join(json.dumps(part, separators=(",", ":")) for part in (header, encode(result)))
    target = entry_path(folder, key)
    try:
        target.parent.mkdir(mode=0o700, exist_ok=True)
        fd, temporary = tempfile.mkstemp(dir=target.parent, prefix=".tmp-")
        try:
            with os.fdopen(fd, "w", encoding="utf-8") as handle:
                handle.write(text)
            os.replace(temporary, target)
        except BaseException:
            Path(temporary).unlink(missing_ok=True)
            raise
    except OSError:
        pass

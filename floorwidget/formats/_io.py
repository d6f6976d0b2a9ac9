"""Shared reader/writer plumbing: atomic writes and file-and-line errors."""

from __future__ import annotations

import contextlib
import json
import os
import tempfile
from pathlib import Path

from ..design import DesignError


@contextlib.contextmanager
def atomic_write(path, mode: str = "w", encoding: str | None = "utf-8"):
    """Open a temporary file beside ``path``; on success rename it over ``path``.

    Nothing is left behind on failure: either ``path`` is the complete new file or it is
    untouched (POSIX ``rename`` is atomic within one file system).
    """
    path = Path(path)
    directory = path.parent if str(path.parent) else Path(".")
    if not directory.is_dir():
        raise DesignError(f"cannot write {path}: directory {directory} does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=directory)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    try:
        with os.fdopen(fd, mode, encoding=None if "b" in mode else encoding) as f:
            yield f
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def read_text(path) -> str:
    """Read a text file; a missing, unreadable or binary file is a :class:`DesignError`."""
    path = Path(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise DesignError("file not found", file=str(path)) from None
    except OSError as e:
        raise DesignError(f"cannot read: {e.strerror}", file=str(path)) from None
    if b"\x00" in data:
        line = data[: data.index(b"\x00")].count(b"\n") + 1
        raise DesignError("binary data (NUL byte) in a text file", file=str(path), line=line)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as e:
        line = data[: e.start].count(b"\n") + 1
        raise DesignError("not UTF-8 text", file=str(path), line=line) from None


def read_json_file(path):
    """Decode a JSON file; syntax errors become a :class:`DesignError` with the line."""
    path = Path(path)
    try:
        return json.loads(read_text(path))
    except json.JSONDecodeError as e:
        raise DesignError(f"invalid JSON: {e.msg} (column {e.colno})", file=str(path),
                          line=e.lineno) from None

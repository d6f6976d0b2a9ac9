"""Shared reader/writer plumbing: compressed input, all-or-nothing writes, file-and-line errors.

Reading
-------
:func:`read_text` and :func:`read_json_file` read plain, ``.gz`` and ``.bz2`` files alike
(decompressed in memory, in chunks, never through a temporary copy on disk), strip a UTF-8
byte-order mark, and turn every way a file can be unreadable into a :class:`DesignError` naming
it.  :func:`format_suffix` gives the suffix that decides the format (``x.def.gz`` -> ``.def``).

Writing
-------
:func:`atomic_write` writes one file, :func:`write_files` a set of files (a Bookshelf set, a
DEF with its LEF) all or nothing:

1. every file is written to a temporary beside its target (``.<name>.fw-<pid>-<tag>.tmp``)
   and flushed to disk;
2. a commit record (``.<name>.fw-<pid>-<tag>.commit``, listing the renames) is written
   atomically: from now on the new set is the truth;
3. the temporaries are renamed over their targets, then the record is removed.

A writer killed before step 2 leaves only temporaries, which no reader ever opens (their names
start with a dot and end in ``.tmp``); a writer killed during step 3 leaves the record.
:func:`recover` (called by every load and every write in that folder) finishes the renames of
records whose writer process is gone, and deletes that process's stray temporaries, so a reader
sees the old set or the new set, never a mix.
"""

from __future__ import annotations

import bz2
import contextlib
import gzip
import io
import json
import os
import re
import secrets
import zlib
from collections.abc import Callable, Sequence
from pathlib import Path

from ..design import DesignError

__all__ = ["COMPRESSED", "MAX_EXPANSION", "MAX_INPUT_BYTES", "MIN_EXPANSION_CAP",
           "atomic_write", "decompressed_cap", "format_suffix",
           "read_json_file", "read_text", "recover", "write_files"]

COMPRESSED = (".gz", ".bz2")
MAX_INPUT_BYTES = 1 << 33   # 8 GiB: the largest plain text file read
# Caps on what a compressed input may expand to (a decompression bomb stops at the cap, while
# the decompressed text is still small).  Text of our formats compresses 5-20 times (the
# shared real designs: ariane136's DEF 9.9x with gzip, aes_cipher_top's 8.0x); a bomb made of
# one repeated byte reaches about 1000x with gzip and millions with bz2.  So a compressed file
# may expand to MAX_EXPANSION times its own size, at least MIN_EXPANSION_CAP (a small file
# of a very regular text, e.g. a Bookshelf .scl of identical rows) and at most
# MAX_COMPRESSED_TEXT.
MAX_EXPANSION = 100
MIN_EXPANSION_CAP = 1 << 26        # 64 MiB
MAX_COMPRESSED_TEXT = 1 << 32      # 4 GiB
MAX_JSON_DEPTH = 200        # the depth named when a document is too deep to decode
_CHUNK = 1 << 22
_BOM = "\ufeff"
_TEMP = re.compile(r"^\.(?P<name>.+)\.fw-(?P<pid>\d+)-(?P<tag>[0-9a-f]+)\.(?P<ext>tmp|commit)$")


# ---------------------------------------------------------------------------------------------
# reading


def format_suffix(path) -> str:
    """The lower-case suffix that decides the format: ``a.def.gz`` -> ``.def``."""
    p = Path(path)
    s = p.suffix.lower()
    if s in COMPRESSED:
        s = Path(p.stem).suffix.lower()
    return s


def decompressed_cap(compressed_size: int) -> int:
    """Bytes a compressed input of ``compressed_size`` bytes may expand to: :data:`MAX_EXPANSION`
    times its size, at least :data:`MIN_EXPANSION_CAP`, at most :data:`MAX_COMPRESSED_TEXT`."""
    return int(min(max(MAX_EXPANSION * compressed_size, MIN_EXPANSION_CAP), MAX_COMPRESSED_TEXT))


def _read_bytes(path: Path) -> bytes:
    s = path.suffix.lower()
    try:
        if s not in COMPRESSED:
            size = path.stat().st_size
            if size > MAX_INPUT_BYTES:
                raise DesignError(f"file of {size} bytes is larger than the "
                                  f"{MAX_INPUT_BYTES} bytes floorwidget reads", file=str(path))
            return path.read_bytes()
        opener = gzip.open if s == ".gz" else bz2.open
        buf = io.BytesIO()
        with opener(path, "rb") as f:
            packed = os.fstat(f.fileno()).st_size
            cap = decompressed_cap(packed)
            while True:  # read(n) inflates at most n bytes: memory stays within cap + _CHUNK
                chunk = f.read(_CHUNK)
                if not chunk:
                    break
                buf.write(chunk)
                if buf.tell() > cap:
                    raise DesignError(
                        f"{s[1:]} data of {packed} bytes expands to more than {cap} bytes "
                        f"(over {MAX_EXPANSION}x, or past {MAX_COMPRESSED_TEXT >> 30} GiB): "
                        "refused as a decompression bomb", file=str(path),
                        where=f"{s[1:]} stream")
        return buf.getvalue()
    except FileNotFoundError:
        raise DesignError("file not found", file=str(path)) from None
    except IsADirectoryError:
        raise DesignError("is a directory, not a file", file=str(path)) from None
    except (EOFError, zlib.error, gzip.BadGzipFile) as e:
        raise DesignError(f"damaged {s[1:]} data ({e or 'cut short'})", file=str(path),
                          where=f"{s[1:]} stream") from None
    except OSError as e:
        if e.strerror is None:  # bz2 and gzip report bad data as a bare OSError
            raise DesignError(f"damaged {s[1:]} data ({e})", file=str(path),
                              where=f"{s[1:]} stream") from None
        raise DesignError(f"cannot read: {e.strerror}", file=str(path)) from None


def read_text(path) -> str:
    """Read a text file (plain, ``.gz`` or ``.bz2``); a missing, unreadable or binary file is a
    :class:`DesignError`.  A leading UTF-8 byte-order mark is dropped."""
    path = Path(path)
    recover(path)
    data = _read_bytes(path)
    if b"\x00" in data:
        line = data[: data.index(b"\x00")].count(b"\n") + 1
        raise DesignError("binary data (NUL byte) in a text file", file=str(path), line=line)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as e:
        line = data[: e.start].count(b"\n") + 1
        raise DesignError("not UTF-8 text", file=str(path), line=line) from None
    return text[1:] if text.startswith(_BOM) else text


def _parse_int(s: str):
    # Python refuses int() of more than 4300 digits; a number that long is never a count or a
    # coordinate of ours, so it reads as a float (inf beyond 1e308) and the field check names it
    return int(s) if len(s) <= 30 else float(s)


def _too_deep(text: str) -> int | None:
    """Line of the first bracket nested deeper than :data:`MAX_JSON_DEPTH`, or None.

    Brackets inside strings count too, which only makes the check stricter on odd documents;
    it runs only when the document has that many opening brackets at all.
    """
    depth, line = 0, 1
    for m in re.finditer(r'"(?:[^"\\\n]|\\.)*"|[\[\]{}\n]', text):
        c = m.group()
        if c in "[{":
            depth += 1
            if depth > MAX_JSON_DEPTH:
                return line
        elif c in "]}":
            depth -= 1
        elif c == "\n":
            line += 1
    return None


def read_json_file(path):
    """Decode a JSON file; syntax errors become a :class:`DesignError` with the line.

    Nesting too deep for Python's decoder and integers of thousands of digits are refused with
    the file and line (or read as an out-of-range float, which the field checks then name),
    instead of Python's recursion and integer-size errors.
    """
    path = Path(path)
    text = read_text(path)
    try:
        return json.loads(text, parse_int=_parse_int)
    except json.JSONDecodeError as e:
        raise DesignError(f"invalid JSON: {e.msg} (column {e.colno})", file=str(path),
                          line=e.lineno) from None
    except RecursionError:  # located only now: the check costs a pass over the text
        raise DesignError(f"JSON nested more than {MAX_JSON_DEPTH} levels deep",
                          file=str(path), line=_too_deep(text) or 1) from None


# ---------------------------------------------------------------------------------------------
# writing


_ACTIVE: set[str] = set()  # tags of the writes in progress in this process


def _owner_alive(pid: int, tag: str) -> bool:
    if pid == os.getpid():
        return tag in _ACTIVE
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def recover(path) -> None:
    """Finish or clear what a killed writer left in the folder of ``path``.

    A commit record whose writer is gone has its renames completed (the new set was complete
    when the record was written); temporaries of a gone writer without a record are deleted.
    Records and temporaries of a live process are left alone.  Problems (a read-only folder)
    are ignored: the data files themselves are then still the old, complete set.
    """
    directory = Path(path).parent
    try:
        names = [n for n in os.listdir(directory or ".") if n.startswith(".") and ".fw-" in n]
    except OSError:
        return
    if not names:
        return
    dead = [(n, m) for n in names
            if (m := _TEMP.match(n)) and not _owner_alive(int(m["pid"]), m["tag"])]
    for n, m in dead:  # records first: they name temporaries that must survive until renamed
        if m["ext"] == "commit":
            with contextlib.suppress(OSError, ValueError, TypeError):
                pairs = json.loads((directory / n).read_text("utf-8"))
                for tmp, final in pairs:  # names in this folder, or absolute paths
                    tmp, final = directory / tmp, directory / final
                    if _TEMP.match(tmp.name) and tmp.parent == final.parent and tmp.exists():
                        os.replace(tmp, final)
                os.unlink(directory / n)
    for n, m in dead:
        if m["ext"] == "tmp":
            with contextlib.suppress(OSError):
                os.unlink(directory / n)


def _check_dir(path: Path) -> Path:
    directory = path.parent if str(path.parent) else Path(".")
    if not directory.is_dir():
        raise DesignError(f"cannot write: folder {directory} does not exist", file=str(path))
    return directory


def _temp_name(path: Path, tag: str, ext: str = "tmp") -> Path:
    return path.parent / f".{path.name}.fw-{os.getpid()}-{tag}.{ext}"


def _fsync_dir(directory: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(directory, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


class _Output:
    """The file object handed to a writer over the binary file ``raw`` of ``path``: compressed
    by the path's suffix, text unless ``mode`` has ``b``.  :meth:`finish` completes it without
    closing ``raw``."""

    def __init__(self, raw, path: Path, mode: str, encoding: str | None):
        s = path.suffix.lower()
        self.comp = None
        if s == ".gz":
            self.comp = gzip.GzipFile(filename=Path(path.stem).name, mode="wb", fileobj=raw,
                                      mtime=0)
        elif s == ".bz2":
            self.comp = bz2.BZ2File(raw, "wb")
        base = self.comp if self.comp is not None else raw
        self.text = None if "b" in mode else io.TextIOWrapper(
            base, encoding=encoding or "utf-8", newline="")
        self.file = self.text if self.text is not None else base

    def finish(self) -> None:
        if self.text is not None:
            self.text.flush()
            self.text.detach()
        if self.comp is not None:
            self.comp.close()  # writes the trailer; a file object given to it stays open


def _write_error(path: Path, e: OSError) -> DesignError:
    return DesignError(f"cannot write: {e.strerror or e}", file=str(path))


def write_files(items: Sequence[tuple[Path | str, Callable]], mode: str = "w",
                encoding: str | None = "utf-8") -> None:
    """Write a set of files all or nothing (see the module docstring for the protocol).

    The commit record sits beside the last file of ``items``; a set spread over several
    folders is finished by a load from that last file's folder.

    Parameters
    ----------
    items : sequence of (path, write)
        ``write(f)`` writes the content of ``path`` to the open file ``f`` (text unless ``mode``
        has ``b``; compressed when the path ends in ``.gz`` or ``.bz2``).
    mode, encoding
        As for :func:`open`.

    Raises
    ------
    DesignError
        Naming the target (never a temporary) when its folder is missing or unwritable, or the
        disk refuses the data; no target is changed then and no temporary is left.
    """
    paths = [Path(p) for p, _ in items]
    for p in paths:
        _check_dir(p)
        recover(p)
    tag = secrets.token_hex(4)
    temps: list[Path] = []
    record: Path | None = None
    _ACTIVE.add(tag)
    try:
        for p, (_, write) in zip(paths, items):
            tmp = _temp_name(p, tag)
            try:
                fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
            except OSError as e:
                raise _write_error(p, e) from None
            temps.append(tmp)
            try:
                with os.fdopen(fd, "wb") as raw:
                    out = _Output(raw, p, mode, encoding)
                    write(out.file)
                    out.finish()
                    raw.flush()
                    os.fsync(raw.fileno())
            except OSError as e:
                raise _write_error(p, e) from None
        if len(paths) > 1:  # the record sits beside the last file (the one users load)
            main = paths[-1]
            record = _temp_name(main, tag, "commit")
            rec_tmp = _temp_name(main.with_name(main.name + ".commit"), tag)
            temps.append(rec_tmp)
            here = os.path.abspath(main.parent)
            pairs = [[t.name, p.name] if os.path.abspath(p.parent) == here
                     else [os.path.abspath(t), os.path.abspath(p)]
                     for t, p in zip(temps, paths)]
            try:
                with open(rec_tmp, "w", encoding="utf-8") as f:
                    json.dump(pairs, f)
                    f.flush()
                    os.fsync(f.fileno())
                os.replace(rec_tmp, record)
            except OSError as e:
                raise _write_error(main, e) from None
            temps.pop()
            _fsync_dir(main.parent)
        for t, p in zip(list(temps), paths):
            try:
                os.replace(t, p)
            except OSError as e:  # after the commit record, the next recover() finishes it
                raise _write_error(p, e) from None
            temps.remove(t)
        if record is not None:
            os.unlink(record)
            record = None
        for d in {p.parent for p in paths}:
            _fsync_dir(d)
    except BaseException:
        if record is None:
            for t in temps:
                with contextlib.suppress(OSError):
                    os.unlink(t)
        raise
    finally:
        _ACTIVE.discard(tag)


@contextlib.contextmanager
def atomic_write(path, mode: str = "w", encoding: str | None = "utf-8"):
    """Open a temporary file beside ``path``; on success rename it over ``path``.

    Nothing is left behind on failure: either ``path`` is the complete new file or it is
    untouched (POSIX ``rename`` is atomic within one file system).  A path ending in ``.gz`` or
    ``.bz2`` is written compressed.  Errors name ``path``, never the temporary.
    """
    path = Path(path)
    _check_dir(path)
    recover(path)
    tag = secrets.token_hex(4)
    tmp = _temp_name(path, tag)
    _ACTIVE.add(tag)
    try:
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except OSError as e:
            raise _write_error(path, e) from None
        try:
            with os.fdopen(fd, "wb") as raw:
                out = _Output(raw, path, mode, encoding)
                yield out.file
                out.finish()
                raw.flush()
                os.fsync(raw.fileno())
            os.replace(tmp, path)
        except OSError as e:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise _write_error(path, e) from None
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise
    finally:
        _ACTIVE.discard(tag)

"""Decompression caps: a small compressed input that expands without bound (a "decompression
bomb") is refused with one line naming the file, before its text fills memory."""

from __future__ import annotations

import bz2
import gzip
import shutil
import tracemalloc
from pathlib import Path

import pytest

import floorwidget as fw
from floorwidget.design import DesignError
from floorwidget.formats import _io

DATA = Path(__file__).parent / "data"
REAL = Path(__file__).resolve().parents[2] / "shared" / "realdata"


def _bomb(path: Path, nbytes: int) -> Path:
    """``nbytes`` of one repeated DEF-looking line, compressed by ``path``'s suffix: one
    compressed 4 MiB stream repeated (gzip and bzip2 readers read concatenated streams)."""
    line = b"- u1 INV + PLACED ( 0 0 ) N ;\n"
    chunk = line * ((4 << 20) // len(line))
    packed = gzip.compress(chunk, 9) if path.suffix == ".gz" else bz2.compress(chunk, 9)
    path.write_bytes(packed * (nbytes // len(chunk)))
    return path


def test_cap_rule():
    # a ratio cap with a floor and a ceiling (module constants of _io)
    assert _io.decompressed_cap(1000) == _io.MIN_EXPANSION_CAP
    assert _io.decompressed_cap(10**7) == _io.MAX_EXPANSION * 10**7
    assert _io.decompressed_cap(10**9) == _io.MAX_COMPRESSED_TEXT


@pytest.mark.parametrize("suffix", [".gz", ".bz2"])
def test_bomb_is_refused_in_bounded_memory(tmp_path, suffix):
    path = _bomb(tmp_path / f"b.def{suffix}", 256 << 20)   # 256 MiB of text
    assert path.stat().st_size * _io.MAX_EXPANSION < 256 << 20
    tracemalloc.start()
    try:
        with pytest.raises(DesignError) as e:
            fw.load(path)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    msg = str(e.value)
    assert "\n" not in msg and msg.startswith(f"{path}: ") and "decompression bomb" in msg
    # stopped at the 64 MiB floor plus one chunk (and BytesIO's growth), not at 256 MiB
    assert peak < 3 * _io.MIN_EXPANSION_CAP


def test_bomb_inside_a_bookshelf_set_names_the_member(tmp_path):
    for p in (DATA / "bookshelf").glob("tiny.*"):
        shutil.copy(p, tmp_path / p.name)
    aux = tmp_path / "tiny.aux"
    aux.write_text(aux.read_text().replace("tiny.nets", "tiny.nets.gz"))
    member = _bomb(tmp_path / "tiny.nets.gz", 128 << 20)
    with pytest.raises(DesignError) as e:
        fw.load(aux)
    assert str(e.value).startswith(f"{member}: ") and "decompression bomb" in str(e.value)


def test_ordinary_compressed_input_reads(tmp_path):
    # a small design far under the floor, compressed 30x and more, still reads
    src = DATA / "bookshelf"
    for p in src.glob("tiny.*"):
        shutil.copy(p, tmp_path / p.name)
    nodes = tmp_path / "tiny.nodes"
    with gzip.open(tmp_path / "tiny.nodes.gz", "wb") as f:
        f.write(nodes.read_bytes())
    nodes.unlink()
    aux = tmp_path / "tiny.aux"
    aux.write_text(aux.read_text().replace("tiny.nodes", "tiny.nodes.gz"))
    assert fw.load(aux).num_blocks > 0


@pytest.mark.skipif(not (REAL / "ariane136").is_dir(), reason="shared real designs not here")
def test_largest_real_design_is_under_the_cap():
    # ariane136's DEF: 4.8 MB of gzip expanding 9.9x to 48 MB; read with its LEFs elsewhere,
    # here only the decompression (the cap is the part this test is about)
    path = REAL / "ariane136" / "ariane136.def.gz"
    text = _io.read_text(path)
    assert text.startswith("VERSION") or "DESIGN" in text[:10000]
    assert len(text) < _io.decompressed_cap(path.stat().st_size)

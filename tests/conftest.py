"""Shared fixtures: the demo design on disk and loaded; ariane136 from the shared real data."""

from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_data" / "heron_dsp.json"
ARIANE = ROOT.parent / "shared" / "realdata" / "ariane136"


def ariane136_files() -> tuple[Path, list[Path]]:
    """ariane136's DEF and its LEFs in reading order: technology, cells, every SRAM."""
    lefs = [ARIANE / "asap7_tech_1x_201209.lef", ARIANE / "asap7sc7p5t_27_R_1x_201211.lef",
            *sorted(ARIANE.glob("sram*.lef"))]
    return ARIANE / "ariane136.def.gz", lefs


@pytest.fixture(scope="session")
def demo_path() -> Path:
    return DEMO


@pytest.fixture(scope="session")
def demo_design():
    """The demo design, loaded once per test session (treat it as read-only)."""
    import floorwidget as fw

    return fw.load(DEMO)


@pytest.fixture(scope="session")
def artifacts() -> Path:
    """Folder for screenshots and other files a test leaves for people to look at."""
    p = ROOT / "tests" / "artifacts"
    p.mkdir(parents=True, exist_ok=True)
    return p


@pytest.fixture(scope="session")
def ariane136():
    """ariane136 (146k components, 136 SRAM macros), loaded once; skipped without the data."""
    if not ARIANE.is_dir():
        pytest.skip("../shared/realdata/ariane136 not present")
    import floorwidget as fw

    path, lefs = ariane136_files()
    with pytest.warns(UserWarning, match="single-pin"):
        return fw.load(path, lef=[str(p) for p in lefs])

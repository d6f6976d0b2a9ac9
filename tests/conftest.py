"""Shared fixtures: the demo design on disk and loaded."""

from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_data" / "heron_dsp.json"


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

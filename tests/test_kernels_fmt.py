"""Number formatting: one rule set for the CLI, the widget and render (Python's format spec)."""

from __future__ import annotations

import numpy as np
import pytest

from floorwidget.kernels import fmt


@pytest.mark.parametrize("v, kw, want", [
    (1234567.8, {}, "1,234,568"),
    (999.5, {}, "1e+03"),               # below ``big`` the significant digits rule
    (999.4, {}, "999"),
    (0.0123456, {}, "0.0123"),
    (12345.6, {"digits": 4, "big": 1e4}, "12,346"),
    (1234.56, {"digits": 4, "big": 1e4}, "1,235"),
    (12.5, {"unit": " µm"}, "12.5 µm"),
    (float("nan"), {}, "n/a"),
    (float("-inf"), {}, "n/a"),
    (np.float32(0.5), {}, "0.5"),
])
def test_number(v, kw, want):
    assert fmt.number(v, **kw) == want


@pytest.mark.parametrize("v, want", [
    (None, "–"), (True, "yes"), (np.bool_(False), "no"), (12345, "12,345"),
    (np.int64(-7), "-7"), ("", "none"), ("ram0", "ram0"), ({"seed": 3, "d": 0.75},
                                                           "seed: 3, d: 0.75"),
    ({"b", "a"}, "a, b"), ([], "none"), ((1, 2.5), "1, 2.5"),
])
def test_value(v, want):
    assert fmt.value(v) == want


def test_percent():
    assert fmt.percent(0.424) == "42%" and fmt.percent(None) == "–"
    assert fmt.percent(float("nan")) == "n/a"

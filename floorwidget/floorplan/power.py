"""The power grid: rings, straps and followpins from a specification the engineer sets.

A :class:`GridSpec` says where the VDD/VSS wiring goes; :func:`build_grid` turns it into the
rectangles of a :class:`~floorwidget.kernels.power.PowerShapes` (numpy arrays per shape with
layer, net and kind) for a design, checking first that it can fit:

- **core ring**: a VDD ring (inner) and a VSS ring (outer) around the core, ``ring_offset``
  outside it, each ``ring_width`` wide and ``ring_spacing`` apart; the bottom and top sides on
  the horizontal ring layer, the left and right sides on the vertical one;
- **macro rings**: the same pair around each macro named in ``macro_rings``; they follow the
  macros, so they are made for a floorplan when the grid is drawn or written
  (:meth:`PowerShapes.for_macros <floorwidget.kernels.power.PowerShapes.for_macros>`);
- **straps** (DEF ``SHAPE STRIPE``) on two layers, one vertical and one horizontal by the LEF
  layer directions: centres ``offset + k · pitch`` from the core's left (bottom) edge, nets
  alternating VDD, VSS, VDD, ..., each running across the core and, with a ring, over both
  rings so that each strap meets its ring;
- **followpins**: one along every row boundary on the rail layer (the lowest routing layer by
  default), the net by the row orientation (an ``N`` row has VSS at its bottom and VDD at its
  top, an ``FS`` row the reverse: the usual standard-cell rail order, common practice).

Layers among the ``low_layers`` lowest routing layers are *low*: macros obstruct them (the
ariane136 SRAM abstracts obstruct M1–M4), so stripes on them are cut over macros, act as
partial placement blockages for standard cells (at most ``cell_density`` of a stripe's area is
filled by cells) and obey the channel rule (:mod:`floorwidget.kernels.power`).  These are
early-floorplanning estimates of where the grid goes; IR drop, electromigration and the
final grid belong to the implementation flow's power and physical checks.
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from ..design import MACRO, Design, DesignError, Floorplan
from ..kernels.power import FOLLOWPIN, RING, STRIPE, PowerShapes, ring_rects
from ..kernels.rects import clip

__all__ = ["ASSUMED_LAYERS", "GridSpec", "build_grid", "grid_layers", "grid_shapes",
           "load_spec"]

#: The routing stack assumed for a design without LEF layers: M1 horizontal, alternating.
ASSUMED_LAYERS: tuple[tuple[str, str], ...] = tuple(
    (f"M{k}", "H" if k % 2 else "V") for k in range(1, 10))

_WHERE = "power grid"


@dataclass(frozen=True)
class GridSpec:
    """What the engineer asks of the power grid (µm).

    Parameters
    ----------
    strap_layers : (str, str)
        The vertical and the horizontal strap layer (by the LEF ``DIRECTION``).
    strap_width, strap_spacing : float
        Width of a strap; spacing it keeps to its neighbour and to a macro (channel rule).
    strap_pitch : float or (float, float)
        Centre-to-centre distance of neighbouring straps (nets alternate), for the vertical
        and the horizontal layer; at least ``strap_width + strap_spacing``.
    strap_offset : float or (float, float)
        Centre of the first strap from the core's left (bottom) edge.
    ring_layers : (str, str) or None
        The horizontal and the vertical ring layer; None: no core ring.
    ring_width, ring_spacing, ring_offset : float
        Width of each ring, the gap between VDD and VSS rings, and from the core (or the
        macro) to the inner ring.
    macro_rings : tuple of str
        Macros that get a ring pair of their own (on ``ring_layers``).
    rail_layer : str or None
        Layer of the followpins (None: the lowest routing layer); ``""`` for none.
    rail_width : float or None
        Followpin width (None: a tenth of the row height).
    low_layers : int
        The lowest this many routing layers are low (module docstring).
    cell_density : float
        Largest share of a low strap's area standard cells may fill, in [0, 1].
    """

    strap_layers: tuple[str, str] = ("M4", "M5")
    strap_width: float = 2.0
    strap_pitch: Any = 40.0
    strap_spacing: float = 1.0
    strap_offset: Any = 10.0
    ring_layers: tuple[str, str] | None = None
    ring_width: float = 2.0
    ring_spacing: float = 1.0
    ring_offset: float = 1.0
    macro_rings: tuple[str, ...] = ()
    rail_layer: str | None = None
    rail_width: float | None = None
    low_layers: int = 4
    cell_density: float = 0.5

    def __post_init__(self) -> None:
        def pair(v, what):
            t = tuple(v) if isinstance(v, (list, tuple)) else (v, v)
            try:
                if len(t) != 2:
                    raise ValueError
                return tuple(float(a) for a in t)
            except (TypeError, ValueError):
                raise DesignError(f"power grid: {what} takes one number or two, got {v!r}",
                                  where=_WHERE) from None
        set_ = object.__setattr__
        set_(self, "strap_layers", tuple(map(str, self.strap_layers)))
        if self.ring_layers is not None:
            set_(self, "ring_layers", tuple(map(str, self.ring_layers)))
        set_(self, "macro_rings", tuple(map(str, self.macro_rings)))
        set_(self, "strap_pitch", pair(self.strap_pitch, "strap_pitch"))
        set_(self, "strap_offset", pair(self.strap_offset, "strap_offset"))
        for name in ("strap_width", "strap_spacing", "ring_width", "ring_spacing",
                     "ring_offset", "cell_density", "rail_width", "low_layers"):
            v = getattr(self, name)
            if v is None and name == "rail_width":
                continue
            try:
                set_(self, name, int(v) if name == "low_layers" else float(v))
            except (TypeError, ValueError):
                raise DesignError(f"power grid: {name} must be a number, got {v!r}",
                                  where=_WHERE) from None

    def to_dict(self) -> dict:
        """Plain JSON form (lists for tuples); :meth:`from_dict` reads it back."""
        return json.loads(json.dumps(asdict(self)))

    @classmethod
    def from_dict(cls, d: dict) -> GridSpec:
        """From :meth:`to_dict`'s form; unknown keys are a :class:`DesignError`."""
        if not isinstance(d, dict):
            raise DesignError("power grid: the specification must be a JSON object",
                              where=_WHERE)
        extra = sorted(set(d) - set(cls.__dataclass_fields__))
        if extra:
            raise DesignError(f"power grid: unknown field(s) {', '.join(map(str, extra))}",
                              where=_WHERE)
        try:
            return cls(**d)
        except (TypeError, ValueError) as e:
            if isinstance(e, DesignError):
                raise
            raise DesignError(f"power grid: {e}", where=_WHERE) from None


def load_spec(path: str) -> GridSpec:
    """A :class:`GridSpec` from a JSON file (:meth:`GridSpec.to_dict`'s keys); errors name the
    file."""
    from ..formats._io import read_json_file

    try:
        return GridSpec.from_dict(read_json_file(path))
    except DesignError as e:
        raise DesignError(e.message, file=path) from None


def grid_layers(design: Design) -> list[tuple[str, str]]:
    """``(name, "H" | "V")`` of the design's routing layers, bottom up (the LEF order), or
    :data:`ASSUMED_LAYERS` when it has fewer than two (no LEF, or the one-layer abstracts
    this tool writes beside a DEF of its own)."""
    layers = [(n, d) for n, d, *_ in design.routing_layers]
    return layers if len(layers) >= 2 else list(ASSUMED_LAYERS)


def _fail(msg: str):
    raise DesignError(f"power grid: {msg}", where=_WHERE)


def _check(spec: GridSpec, design: Design, layers: list[tuple[str, str]]) -> None:
    names = [n for n, _ in layers]
    direction = dict(layers)
    for what, v in (("strap_width", spec.strap_width), ("ring_width", spec.ring_width),
                     ("strap_pitch", min(spec.strap_pitch))):
        if not (np.isfinite(v) and v > 0):
            _fail(f"{what} must be a positive number, got {v:g}")
    for what, v in (("strap_spacing", spec.strap_spacing), ("ring_spacing", spec.ring_spacing),
                    ("ring_offset", spec.ring_offset)):
        if not (np.isfinite(v) and v >= 0):
            _fail(f"{what} must be zero or more, got {v:g}")
    if not all(np.isfinite(spec.strap_offset)):
        _fail("strap_offset must be finite")
    if spec.rail_width is not None and not (np.isfinite(spec.rail_width)
                                            and spec.rail_width > 0):
        _fail(f"rail_width must be a positive number, got {spec.rail_width:g}")
    if not 0.0 <= spec.cell_density <= 1.0:
        _fail(f"cell_density must be in [0, 1], got {spec.cell_density:g}")
    if len(spec.strap_layers) != 2 or (spec.ring_layers is not None
                                       and len(spec.ring_layers) != 2):
        _fail("strap_layers and ring_layers each name two layers")
    used = list(spec.strap_layers) + list(spec.ring_layers or ())
    if spec.rail_layer:
        used.append(spec.rail_layer)
    for lay in used:
        if lay not in direction:
            _fail(f"unknown layer {lay!r} (routing layers: {', '.join(names)})")
    want = [("strap", spec.strap_layers[0], "V"), ("strap", spec.strap_layers[1], "H")]
    if spec.ring_layers is not None:
        want += [("ring", spec.ring_layers[0], "H"), ("ring", spec.ring_layers[1], "V")]
    source = "in the LEF" if len(design.routing_layers) >= 2 else \
        "in the assumed stack (the design has no LEF layers)"
    for what, lay, d in want:
        if direction[lay] != d:
            word = {"V": "vertical", "H": "horizontal"}
            _fail(f"{what} layer {lay!r} runs {word[direction[lay]]} {source}; the "
                  f"{word[d]} {what} layer must run {word[d]}")
    for k, p in enumerate(spec.strap_pitch):
        if p < spec.strap_width + spec.strap_spacing:
            _fail(f"strap pitch {p:g} µm on {spec.strap_layers[k]} is smaller than strap "
                  f"width + spacing ({spec.strap_width + spec.strap_spacing:g} µm)")
    if spec.ring_layers is not None:
        reach = spec.ring_offset + 2 * spec.ring_width + spec.ring_spacing
        c, d = design.core, design.die
        out = np.array([d[0] - (c[0] - reach), d[1] - (c[1] - reach),
                        (c[2] + reach) - d[2], (c[3] + reach) - d[3]])
        if (out > 1e-9).any():
            side = ("left", "bottom", "right", "top")[int(np.argmax(out))]
            _fail(f"the core ring reaches {out.max():g} µm outside the die on the {side} "
                  f"(offset + 2 widths + spacing = {reach:g} µm; the core is "
                  f"{np.min(c[:2] - d[:2]):g} µm from the die at the least)")
    missing = [m for m in spec.macro_rings if m not in design.index
               or design.kind[design.index[m]] != MACRO]
    if missing:
        _fail(f"macro_rings names {missing[0]!r}, which is not a macro of the design")
    if spec.macro_rings and spec.ring_layers is None:
        _fail("macro_rings needs ring_layers")


def _straps(spec: GridSpec, core: np.ndarray, span: np.ndarray, lay: tuple[int, int]):
    """Strap rectangles, vertical then horizontal: centres from the ``core`` edges at the
    offset and pitch, lengths over ``span`` (the core, or the rings' outer edges)."""
    rects, layer, net = [], [], []
    w = spec.strap_width
    for k in (0, 1):  # 0: vertical (x centres), 1: horizontal (y centres)
        lo, hi = core[k], core[k + 2]
        start = lo + spec.strap_offset[k]
        c = start + spec.strap_pitch[k] * np.arange(
            max(int(np.floor((hi - w / 2 - start) / spec.strap_pitch[k] + 1e-9)) + 1, 0))
        c = c[c - w / 2 >= lo - 1e-9]
        a, b = np.full(len(c), span[1 - k]), np.full(len(c), span[3 - k])
        rects.append(np.stack([c - w / 2, a, c + w / 2, b], 1) if k == 0
                     else np.stack([a, c - w / 2, b, c + w / 2], 1))
        layer.append(np.full(len(c), lay[k]))
        net.append(np.arange(len(c)) % 2)
    return np.concatenate(rects), np.concatenate(layer), np.concatenate(net)


def _followpins(design: Design, width: float, layer: int):
    """One followpin per distinct row edge (row bottoms and tops), net by row orientation."""
    if not len(design.row_y):
        return np.zeros((0, 4)), np.zeros(0, np.int64), np.zeros(0, np.int64)
    x0 = design.row_x
    x1 = x0 + design.row_site_width * design.row_num_sites
    flipped = np.isin(design.row_orient, (1, 5))  # S, FS: VDD at the bottom
    y = np.concatenate([design.row_y, design.row_y + design.row_height])
    net = np.concatenate([np.where(flipped, 0, 1), np.where(flipped, 1, 0)])
    xs, xe = np.concatenate([x0, x0]), np.concatenate([x1, x1])
    key = np.round(np.stack([y, xs, xe], 1), 6)
    _, first = np.unique(key, axis=0, return_index=True)
    first = np.sort(first)
    r = np.stack([xs[first], y[first] - width / 2, xe[first], y[first] + width / 2], 1)
    return r, np.full(len(first), layer), net[first]


def build_grid(design: Design, spec: GridSpec) -> PowerShapes:
    """The floorplan-independent shapes of ``spec`` for ``design`` (rings around macros are
    made per floorplan by :func:`grid_shapes`).

    Raises
    ------
    DesignError
        One line naming the power grid: a ring outside the die, a pitch smaller than width +
        spacing, an unknown layer, a strap or ring layer whose LEF direction does not match,
        a bad number, or a ring asked around something that is not a macro.
    """
    layers = grid_layers(design)
    _check(spec, design, layers)
    names = [n for n, _ in layers]
    idx = {n: k for k, n in enumerate(names)}
    c = design.core.astype(np.float64)
    parts = []
    span = c.copy()
    if spec.ring_layers is not None:
        h, v = idx[spec.ring_layers[0]], idx[spec.ring_layers[1]]
        r, lay, net = ring_rects(c[None], spec.ring_width, spec.ring_spacing, spec.ring_offset,
                                 (h, v))
        parts.append((r, lay, net, np.full(len(r), RING), np.full(len(r), spec.ring_width)))
        reach = spec.ring_offset + 2 * spec.ring_width + spec.ring_spacing
        span = c + np.array([-reach, -reach, reach, reach])
    # straps are placed by their offset from the core and run over the rings
    r, lay, net = _straps(spec, c, span, (idx[spec.strap_layers[0]], idx[spec.strap_layers[1]]))
    for k, lay_k in enumerate(spec.strap_layers):
        if not (lay == idx[lay_k]).any():
            _fail(f"no strap on {lay_k} fits in the core (offset {spec.strap_offset[k]:g} µm, "
                  f"width {spec.strap_width:g} µm, core {c[k + 2] - c[k]:g} µm across)")
    parts.append((r, lay, net, np.full(len(r), STRIPE), np.full(len(r), spec.strap_width)))
    rail = names[0] if spec.rail_layer is None else spec.rail_layer
    if rail:
        rh = float(np.median(design.row_height)) if len(design.row_height) else 1.0
        rw = spec.rail_width if spec.rail_width is not None else rh / 10
        r, lay, net = _followpins(design, rw, idx[rail])
        r = clip(r, design.die)  # (rows on the die edge: half a followpin)
        parts.append((r, lay, net, np.full(len(r), FOLLOWPIN), r[:, 3] - r[:, 1]))
    return PowerShapes(
        layers=tuple(names), low=np.arange(len(names)) < spec.low_layers,
        rects=np.concatenate([p[0] for p in parts]),
        layer=np.concatenate([p[1] for p in parts]), net=np.concatenate([p[2] for p in parts]),
        shape=np.concatenate([p[3] for p in parts]),
        width=np.concatenate([p[4] for p in parts]), spacing=spec.strap_spacing,
        cell_density=spec.cell_density, spec=spec.to_dict(), macro_rings=spec.macro_rings)


def grid_shapes(design: Design, fp: Floorplan) -> PowerShapes | None:
    """The design's power grid as drawn for floorplan ``fp`` (None without a grid): low
    stripes and followpins cut over the macros, rings around the macros that asked for them.
    """
    return design.power_shapes(fp)

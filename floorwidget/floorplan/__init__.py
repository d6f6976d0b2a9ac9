"""Making a floorplan from a netlist: die, core, rows and tracks (``init``), I/O pin
assignment (``pins``) and the power grid (``power``).

These are the steps an engineer takes before macros and cells are placed. The package sits
beside ``placer``: it may import ``placer``, ``metrics``, ``formats``, ``design`` and
``kernels``; ``session``, ``cli`` and ``widget`` import it.
"""

from .init import floorplan_netlist as floorplan_netlist
from .init import load_netlist as load_netlist
from .init import place_pins_evenly as place_pins_evenly
from .pins import PinConstraints, PinGroup, assign_pins, assign_pins_iterated  # noqa: F401
from .power import GridSpec as GridSpec  # the power grid
from .power import build_grid as build_grid

"""Bookshelf placement format: ``.aux`` naming ``.nodes .nets .wts .pl .scl``.

Reading
-------
:func:`read_aux` reads a full set; :func:`read_pl` reads a placement for an already loaded design.
The readers never keep a Python object per pin or per token: a file is read whole, split into
tokens by numpy over its bytes (colons are tokens of their own, ``#`` starts a comment), the
line structure is found over the token arrays, numeric columns are converted in bulk (an exact
integer fast path for plain decimals), and node names are matched through an open-addressing
hash table keyed by each name's bytes (names over eight bytes are confirmed byte by byte).  The
first token of every line knows its line number, so every error names the file and the line;
a token's line is looked up only when an error is reported.  A node name may not contain ``:``
(it always ends a token).

How Bookshelf nodes become floorwidget blocks (our choices, documented here and in DEVELOPERS):

* A movable node taller than the row height is a ``MACRO``; any other movable node a ``CELL``.
  The row height is the smallest row height of the ``.scl``; without rows it is the most common
  movable node height.
* A ``terminal`` node whose area exceeds ``row height ** 2`` is a fixed ``MACRO`` (a pre-placed
  block); a smaller or zero-area ``terminal`` and every ``terminal_NI`` is a ``TERMINAL`` (an I/O
  pin).  Both are ``FIXED``.  ``/FIXED`` or ``/FIXED_NI`` in the ``.pl`` also make a node ``FIXED``.
* Macros may take all eight orientations; other blocks their ``.pl`` orientation only.
* The placement grid pitch is (site spacing, row height) of the first row, from its origin.
* The die is the bounding box of the rows and of every fixed object (the format has no die).
* Pins of ``.nets`` are offsets from the node centre in the N orientation, as in floorwidget; a
  pin line without ``: dx dy`` sits at the centre.  Pin directions are not kept.
* ``.wts`` lines naming a net set its weight; lines naming a node are ignored (node weights have
  no use here); lines naming neither are skipped with a :class:`BookshelfWarning` (weights are
  advice, not structure).
* Every ``terminal`` and ``terminal_NI`` node must be placed by the ``.pl`` (a fixed object
  left out is an error, naming the first one); a movable node left out starts at (0, 0).
* ``terminal_NI`` nodes are remembered (``design.terminal_ni``) so that writing the design
  back gives ``terminal_NI`` and ``/FIXED_NI`` exactly for them and ``terminal`` and ``/FIXED``
  for every other fixed node.  Designs from other formats write their I/O terminals as
  ``terminal_NI`` (pins may be overlapped).
* ``.scl`` ``Siteorient`` is kept when it names an orientation (``N``, ``FS``, ...); numeric codes
  read as N.  Vertical rows are refused.

Writing
-------
:func:`write_pl` writes a placement atomically; :func:`write_aux` a complete set for a design, all
or nothing (a failure or a kill never leaves old and new files mixed).  What Bookshelf cannot say
is lost on a round trip: halos, allowed orientations, blockages, a die larger than the rows and
fixed objects, pin names, block kinds other than those the rules above give back (soft clusters
come back as cells or macros), and the difference between pinned and fixed (both are written
``/FIXED``).

References
----------
The format as used by the ISPD placement contests: Nam, Alpert, Villarrubia, Winter, Yildiz,
"The ISPD2005 placement contest and benchmark suite", ISPD 2005 (from memory).
"""

from __future__ import annotations

from .reader import read_aux, read_pl
from .tokens import BookshelfWarning
from .writer import write_aux, write_pl

__all__ = ["BookshelfWarning", "read_aux", "read_pl", "write_aux", "write_pl"]

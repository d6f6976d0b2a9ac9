"""Assemble and solve the quadratic placement systems ``A x = b`` (one per axis).

The variables are the centres of the movable blocks.  Every Bound2Bound connection between two
movable pins adds a Laplacian stamp; a connection to a pin of a fixed or pinned block (or an I/O
terminal) adds to the diagonal and moves the fixed pin's position to the right-hand side.  Pin
offsets (already oriented) go to the right-hand side as well, so a pin is ``centre + offset``.
Connected groups of movable blocks that reach no fixed pin get a weak pull toward the core
centre, so ``A`` is always symmetric positive definite; the solve is conjugate gradients with a
Jacobi (diagonal) preconditioner, warm-started from the current positions.

References
----------
P. Spindler, U. Schlichtmann, F. M. Johannes, IEEE Trans. Computer-Aided Design of Integrated
Circuits and Systems 27(8), 2008 (the net model and the quadratic formulation).
M. R. Hestenes, E. Stiefel, J. Research of the National Bureau of Standards 49(6), 1952
(conjugate gradients).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from scipy.sparse.linalg import LinearOperator, cg, spsolve

from .._threads import pool
from ..design import TERMINAL, orient_offsets
from .netmodel import NetTopology, b2b_edges

__all__ = ["QuadraticSystem", "assemble_axis", "solve_spd"]

PULL = 1e-3  # weak pull of floating groups, relative to their mean diagonal
THREADED_MIN = 20000  # systems from this many variables solve x and y in two threads


DIRECT_MAX = 0  # systems up to this many variables are solved directly (SuperLU); 0: never


def _pcg(A, b, x0, dinv, rtol: float, maxiter: int, diag=None):
    """Jacobi-preconditioned conjugate gradients (Hestenes, Stiefel 1952), elementwise numpy.

    Same iteration as ``scipy.sparse.linalg.cg`` with a diagonal ``M``; the inner products are
    plain ``(a * b).sum()`` so that a multi-threaded BLAS does not oversubscribe a busy machine
    (vector dot products of a few thousand entries gain nothing from threads).
    """
    def mv(v):
        return A @ v if diag is None else A @ v + diag * v

    x = np.array(x0, dtype=np.float64) if x0 is not None else np.zeros_like(b)
    r = b - mv(x)
    bnorm = float(np.sqrt((b * b).sum()))
    if bnorm == 0.0:
        return np.zeros_like(b), 0
    tol2 = (rtol * bnorm) ** 2
    z = dinv * r
    p = z.copy()
    rz = float((r * z).sum())
    for _k in range(maxiter):
        if float((r * r).sum()) <= tol2:
            return x, 0
        q = mv(p)
        pq = float((p * q).sum())
        if pq <= 0.0:
            break
        alpha = rz / pq
        x += alpha * p
        r -= alpha * q
        z = dinv * r
        rz_new = float((r * z).sum())
        p *= rz_new / rz
        p += z
        rz = rz_new
    return x, (0 if float((r * r).sum()) <= tol2 else maxiter)


def solve_spd(A, b, x0=None, *, rtol: float = 1e-6, maxiter: int = 500, direct_max=None,
              method: str = "pcg", diag=None):
    """Solve ``A x = b`` for a symmetric positive definite sparse ``A``.

    Jacobi-preconditioned conjugate gradients warm-started at ``x0``: ``method="pcg"`` (default)
    runs the iteration with elementwise numpy (see :func:`_pcg`), ``method="scipy"`` calls
    ``scipy.sparse.linalg.cg`` with ``M`` = the inverse diagonal.  Systems of at most
    ``direct_max`` (default :data:`DIRECT_MAX`, i.e. never) unknowns are solved by a sparse LU
    factorisation instead (``scipy.sparse.linalg.spsolve``).

    When ``diag`` is given, ``A`` holds only the off-diagonal part and the matrix is
    ``A + diag(diag)`` (the iteration then never forms the sum).

    Returns
    -------
    x : ndarray
    info : int
        0 when converged to ``rtol`` (or solved directly), the iteration cap otherwise.
    """
    n = A.shape[0]
    if method == "pcg" and diag is not None and n > (DIRECT_MAX if direct_max is None
                                                     else direct_max):
        dinv = 1.0 / np.where(diag > 0, diag, 1.0)
        return _pcg(A, b, x0, dinv, rtol, maxiter, diag=diag)
    if diag is not None:
        A = A + sp.diags_array(diag)
    if n <= (DIRECT_MAX if direct_max is None else direct_max):
        return spsolve(sp.csc_array(A), b), 0
    d = A.diagonal()
    dinv = 1.0 / np.where(d > 0, d, 1.0)
    if method == "pcg":
        return _pcg(sp.csr_array(A), b, x0, dinv, rtol, maxiter)
    if method != "scipy":
        raise ValueError(f"unknown solve method {method!r} (expected 'pcg' or 'scipy')")
    M = LinearOperator((n, n), matvec=lambda v: dinv * v.ravel(), dtype=np.float64)
    x, info = cg(A, b, x0=x0, rtol=rtol, atol=0.0, maxiter=maxiter, M=M)
    return x, info


def assemble_axis(pos, off, pin_var, nv: int, topo: NetTopology, eps: float):
    """Matrix and right-hand side of one axis.

    Parameters
    ----------
    pos : (P,) pin coordinates now (block centre plus oriented offset).
    off : (P,) oriented pin offsets from the block centre.
    pin_var : (P,) variable of each pin's block, -1 for fixed blocks.
    nv : number of variables.
    topo, eps : see :func:`~floorwidget.placer.netmodel.b2b_edges`.

    Returns
    -------
    A : (nv, nv) CSR matrix (off-diagonal part plus diagonal)
    diag : (nv,) the diagonal
    rhs : (nv,)
    """
    a, b, w = b2b_edges(pos, topo, eps)
    va = pin_var[a]
    vb = pin_var[b]
    ma = va >= 0
    mb = vb >= 0
    mm = ma & mb & (va != vb)
    mf = ma & ~mb
    fm = ~ma & mb
    wmm = w[mm]
    iam, ibm = va[mm], vb[mm]
    delta = off[a[mm]] - off[b[mm]]
    idx = np.concatenate([iam, ibm, va[mf], vb[fm]])
    diag = np.bincount(idx, weights=np.concatenate([wmm, wmm, w[mf], w[fm]]),
                       minlength=nv).astype(np.float64)  # (an empty bincount is integer)
    rhs_w = np.concatenate([-wmm * delta, wmm * delta,
                            w[mf] * (pos[b[mf]] - off[a[mf]]),
                            w[fm] * (pos[a[fm]] - off[b[fm]])])
    rhs = np.bincount(idx, weights=rhs_w, minlength=nv).astype(np.float64)
    it = np.int32 if nv < 2**31 - 1 else np.int64
    rows = np.concatenate([iam, ibm]).astype(it)
    cols = np.concatenate([ibm, iam]).astype(it)
    A = sp.csr_array((np.concatenate([-wmm, -wmm]), (rows, cols)), shape=(nv, nv))
    return A, diag, rhs


class QuadraticSystem:
    """The quadratic placement problem of one design with one set of movable blocks.

    Parameters
    ----------
    design : Design
    movable : (n,) bool
        Blocks that are variables (terminals are never variables).
    multiplier : float or (m,) array
        Net weight multipliers (``net_weight_scale``).
    """

    def __init__(self, design, movable, multiplier=1.0):
        self.design = design
        mov = np.asarray(movable, bool) & (design.kind != TERMINAL)
        self.blocks = np.flatnonzero(mov)
        self.nv = nv = len(self.blocks)
        var = np.full(design.num_blocks, -1, np.int64)
        var[self.blocks] = np.arange(nv)
        self.var = var
        self.topo = topo = NetTopology.from_design(design, multiplier, only=mov)
        self.pin_var = var[topo.block]
        self.pin_dx = design.pin_dx[topo.pin]
        self.pin_dy = design.pin_dy[topo.pin]
        pv = self.pin_var
        self.pins_of_var = np.bincount(pv[pv >= 0], minlength=nv).astype(np.float64)
        self.floating = self._floating()
        c = design.core
        self.pull_to = ((c[0] + c[2]) / 2, (c[1] + c[3]) / 2)  # floating groups' target
        span = (c[2] - c[0]) + (c[3] - c[1])
        self.eps = 1e-5 * span

    def _floating(self) -> np.ndarray:
        """Variables whose connected group (through movable blocks) reaches no fixed pin."""
        nv, topo, pv = self.nv, self.topo, self.pin_var
        if nv == 0:
            return np.zeros(0, bool)
        m = topo.num_nets
        on = pv >= 0
        g = sp.csr_array((np.ones(int(on.sum())), (pv[on], nv + topo.net[on])),
                         shape=(nv + m, nv + m))
        _, lab = connected_components(g, directed=False)
        fixed_net = np.zeros(m, bool)
        fixed_net[topo.net[~on]] = True
        anchored = np.zeros(lab.max() + 1, bool)
        anchored[lab[nv:][fixed_net]] = True
        return ~anchored[lab[:nv]]

    def pin_offsets(self, orient):
        return orient_offsets(self.pin_dx, self.pin_dy, orient[self.topo.block])

    def solve(self, cx, cy, orient, *, anchor=None, rtol=1e-5, maxiter=300):
        """One Bound2Bound linearisation at centres ``cx, cy`` (all blocks) and its solution.

        Parameters
        ----------
        cx, cy : (n,) block centres now (fixed ones included).
        orient : (n,) orientation codes.
        anchor : tuple ``(tx, ty, wx, wy)`` of (nv,) arrays, optional
            Pseudo-net targets and weights per variable and axis.

        Returns
        -------
        (nx,), (ny,) new centres of the variables, and the CG iteration info per axis.
        """
        if self.nv == 0:
            return np.zeros(0), np.zeros(0), (0, 0)
        ox, oy = self.pin_offsets(orient)
        jobs = [(0, cx, ox), (1, cy, oy)]
        if self.nv >= THREADED_MIN:
            # the two axes are independent: solve them side by side (numpy and scipy.sparse
            # release the GIL in their kernels); results do not depend on the threading
            res = list(pool("solve", 2).map(lambda j: self._solve_axis(*j, anchor, rtol, maxiter),
                                       jobs))
        else:
            res = [self._solve_axis(*j, anchor, rtol, maxiter) for j in jobs]
        return res[0][0], res[1][0], (res[0][1], res[1][1])

    def _solve_axis(self, axis, c, off, anchor, rtol, maxiter):
        """Assemble and solve one axis; returns ``(x, info)``."""
        b = self.topo.block
        pos = c[b] + off
        A, diag, rhs = assemble_axis(pos, off, self.pin_var, self.nv, self.topo, self.eps)
        if anchor is not None:
            t, wa = anchor[axis], anchor[2 + axis]
            diag = diag + wa
            rhs = rhs + wa * t
        if self.floating.any():
            fl = self.floating
            base = diag[fl].mean() if (diag[fl] > 0).any() else 1.0
            pull = PULL * np.where(diag[fl] > 0, diag[fl], base)
            diag[fl] += pull
            rhs[fl] += pull * self.pull_to[axis]
        low = diag <= 0  # only isolated variables without anchor: keep them where they are
        if low.any():
            diag[low] = 1.0
            rhs[low] = c[self.blocks][low]
        x0 = c[self.blocks]
        return solve_spd(A, rhs, x0, rtol=rtol, maxiter=maxiter, diag=diag)


def spectral_coordinates(system: QuadraticSystem, mask: np.ndarray, seed: int = 0,
                         max_degree: int = 64) -> tuple[np.ndarray, np.ndarray]:
    """Two spectral coordinates in [0, 1] for the variables in ``mask``.

    The clique-model Laplacian of the nets among those variables (a net of ``p`` pins adds
    ``1/(p-1)`` between every pair; nets of more than ``max_degree`` pins are left out) is
    shifted so that its smallest eigenvalues become the largest of ``λ_max I − L``, and the
    eigenvectors of the second and third smallest eigenvalues of ``L`` are found with
    ``scipy.sparse.linalg.lobpcg`` (Hall, Management Science 17(3), 1970: they minimise the
    quadratic wirelength under a normalisation, so connected blocks get close coordinates).
    Returns the two vectors, each scaled to [0, 1].
    """
    from scipy.sparse.linalg import lobpcg

    topo = system.topo
    var = np.full(system.nv, -1, np.int64)
    sel = np.flatnonzero(mask)
    var[sel] = np.arange(len(sel))
    pv = system.pin_var
    local = np.where(pv >= 0, var[np.maximum(pv, 0)], -1)
    deg = np.diff(topo.start)
    keep = (deg <= max_degree)[topo.net] & (local >= 0)
    net, node = topo.net[keep], local[keep]
    k = len(sel)
    inc = sp.csr_array((np.ones(len(net)), (node, net)), shape=(k, topo.num_nets))
    cnt = np.asarray(inc.sum(axis=0)).ravel()
    wn = np.where(cnt > 1, 1.0 / np.maximum(cnt - 1, 1), 0.0)
    adj = (inc @ sp.diags_array(wn) @ inc.T).tocsr()
    adj.setdiag(0)
    adj.eliminate_zeros()
    d = np.asarray(adj.sum(axis=1)).ravel()
    lap = sp.diags_array(d) - adj
    rng = np.random.default_rng(seed)
    x0 = rng.standard_normal((k, 3))
    x0[:, 0] = 1.0
    if k <= 200:  # small: a dense eigensolver is exact and cheap
        vec = np.linalg.eigh(lap.toarray())[1]
        u, v = vec[:, 1], vec[:, 2]
        return _unit(u, rng, k), _unit(v, rng, k)
    try:
        # lowest eigenpairs of the (tiny-shifted) Laplacian, Jacobi-preconditioned
        shift = lap + sp.diags_array(np.full(k, 1e-9 * max(float(d.max()), 1.0)))
        dinv = 1.0 / np.where(d > 0, d, 1.0)
        M = sp.diags_array(dinv)
        _, vec = lobpcg(shift, x0, M=M, largest=False, tol=1e-4, maxiter=200)
        u, v = vec[:, 1], vec[:, 2]
    except (np.linalg.LinAlgError, ValueError):  # degenerate graph: keep a random start
        u, v = rng.random(k), rng.random(k)
    return _unit(u, rng, k), _unit(v, rng, k)


def _unit(z: np.ndarray, rng, k: int) -> np.ndarray:
    """``z`` scaled to [0, 1] between its 1st and 99th percentiles (random when flat)."""
    lo, hi = np.percentile(z, [1, 99])
    return np.clip((z - lo) / (hi - lo), 0, 1) if hi > lo else rng.random(k)

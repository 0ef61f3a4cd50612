"""Open samples built from the same :class:`~sweepcli.physics.lattice.TightBinding` as the bulk.

Four geometries, all from ``tb.onsite`` and ``tb.hoppings`` (never a second copy of a model):

* :func:`open_hamiltonian` / :func:`chain` / :func:`flake`: a box of ``L_1 x ... x L_d`` cells,
  open in every direction, as a ``scipy.sparse`` CSR matrix;
* :func:`ribbon`: ``W`` cells open along one lattice direction and periodic along the other,
  returned as a one-dimensional :class:`TightBinding` supercell whose ``bloch(k_par)`` is the
  batched ribbon Hamiltonian ``(..., W n, W n)`` as a function of the momentum along the edge
  (:func:`cut_ribbon`: periodic along the side of a polygon, terminated as that side is);
* :class:`Polygon` / :func:`polygon_hamiltonian`: the orbitals of a covering box whose
  Cartesian positions lie inside a convex polygon whose sides run along lattice vectors
  (built-in :data:`POLYGONS` or given), scaled by a size; a site on a side is kept or dropped by
  the tie-break :data:`POLYGON_SHIFT`, which makes the square of size ``L`` on a square lattice
  the box of ``L x L`` cells.

Orbital order (every geometry): sample orbital ``I = c * n + o`` with ``o`` the orbital inside
the cell and ``c`` the cell's flat index in C order over the box shape, so the *last* lattice
direction runs fastest. :func:`sample_sites` gives the integer cell of every sample orbital and
its Cartesian position ``sum_i (c_i + x_{o,i}) a_i`` (``x_o`` the reduced orbital position).

Open boundaries simply drop every hopping that would leave the box (hard-wall termination at
cell boundaries; no relaxation, no passivation). :func:`memory_estimate`, :func:`check_memory`
and :func:`choose_method` size a sample before it is built, so that one too large for the
machine fails at once with a message that names its size and the estimate.
"""

from __future__ import annotations

import math
import os
from collections.abc import Sequence

import numpy as np
import scipy.sparse as sp

from .lattice import TightBinding, kmesh

#: Bytes per complex128 number.
_C16 = 16
#: ``"auto"`` uses dense diagonalisation up to this many sample orbitals: the measured one-core
#: crossovers of benchmarks/bench_flake_modes.py and bench_corner_count.py. Static: dense eigh
#: against shift-invert Lanczos, dense/Lanczos 0.7 at 256 and 1.6 at 400 orbitals, equal near
#: 300. Driven (dense U formed by Chebyshev steps on the identity against the filtered block
#: iteration on (U + U^dagger)/2, both gaps of one flake in their edge windows, one quiet core):
#: a bhz_corner mass drive at omega = 3.5 takes 2.4 s dense and 2.8 s sparse at 1296 orbitals,
#: 13 s and 5 s at 2304; at omega = 6 2.4 s and 6.9 s at 1296, 12 s both at 2304 (clustered
#: levels at pi slow the iteration down); 1600 sits between the crossovers.
DENSE_MAX = 300
DENSE_MAX_DRIVEN = 1600
#: Memory assumed when the machine's cannot be read (bytes).
FALLBACK_MEMORY = 24 * 2**30


def _shape(tb: TightBinding, shape: int | Sequence[int]) -> tuple[int, ...]:
    shape = (int(shape),) if np.isscalar(shape) else tuple(int(x) for x in shape)
    if len(shape) != tb.dim:
        raise ValueError(f"a sample of a {tb.dim}D model needs {tb.dim} sizes; got {len(shape)} "
                         f"({'x'.join(map(str, shape))})")
    if any(x < 1 for x in shape):
        raise ValueError(f"sample sizes must be at least 1 cell; got {'x'.join(map(str, shape))}")
    return shape


def _shift(length: int, step: int, periodic: bool) -> sp.csr_matrix:
    """``(length, length)`` 0/1 matrix with ``S[m, m + step] = 1`` (wrapped if periodic)."""
    src = np.arange(length)
    dst = src + step
    if periodic:
        dst %= length
    else:
        keep = (dst >= 0) & (dst < length)
        src, dst = src[keep], dst[keep]
    return sp.csr_matrix((np.ones(src.size), (src, dst)), shape=(length, length))


def _cell_shift(shape: tuple[int, ...], r: tuple[int, ...],
                periodic: Sequence[bool]) -> sp.csr_matrix:
    """Cell-space matrix ``S[c, c + R] = 1`` for the C-ordered box (Kronecker product of axes)."""
    out = sp.csr_matrix(np.ones((1, 1)))
    for length, step, per in zip(shape, r, periodic):
        out = sp.kron(out, _shift(length, step, per), format="csr")
    return out


def open_hamiltonian(tb: TightBinding, shape: int | Sequence[int],
                     periodic: Sequence[bool] | None = None) -> sp.csr_matrix:
    """Real-space Hamiltonian of a box of cells, open (default) or periodic per direction.

    Parameters
    ----------
    tb : the model; ``tb.hoppings[R][i, j] = <i, cell 0|H|j, cell R>``.
    shape : ``(L_1, ..., L_d)`` cells (an int for a chain).
    periodic : ``d`` booleans; ``True`` wraps that direction (a torus), default all open.

    Returns
    -------
    scipy.sparse.csr_matrix, complex, shape ``(N, N)`` with ``N = prod(shape) * tb.norb``,
    Hermitian; orbital order as in the module docstring:

        H = 1 (x) onsite + sum_R [ S_R (x) T_R + (S_R (x) T_R)^dagger ],  S_R[c, c + R] = 1

    where ``S_R`` keeps only pairs of cells inside the box (open) or wraps them (periodic).
    """
    shape = _shape(tb, shape)
    per = [False] * tb.dim if periodic is None else [bool(p) for p in periodic]
    ncell = math.prod(shape)
    h = sp.kron(sp.identity(ncell, format="csr"), sp.csr_matrix(tb.onsite), format="csr")
    for r, t in tb.hoppings.items():
        block = sp.kron(_cell_shift(shape, r, per), sp.csr_matrix(t), format="csr")
        h = h + block + block.conj().T
    h = h.tocsr()
    h.sum_duplicates()
    h.eliminate_zeros()
    return h


def chain(tb: TightBinding, cells: int) -> sp.csr_matrix:
    """Open chain of ``cells`` cells of a 1D model: :func:`open_hamiltonian` with shape
    ``(cells,)``."""
    if tb.dim != 1:
        raise ValueError(f"a chain needs a 1D model; this one is {tb.dim}D")
    return open_hamiltonian(tb, (cells,))


def flake(tb: TightBinding, lx: int, ly: int | None = None) -> sp.csr_matrix:
    """Rectangular flake of ``lx x ly`` cells of a 2D model, open in both directions (CSR).

    ``lx`` counts cells along ``a_1``, ``ly`` (default ``lx``) along ``a_2``; the flake is the
    parallelogram spanned by these cells (a rectangle on the square lattice).
    """
    if tb.dim != 2:
        raise ValueError(f"a flake needs a 2D model; this one is {tb.dim}D")
    return open_hamiltonian(tb, (lx, lx if ly is None else ly))


def ribbon(tb: TightBinding, width: int, open_axis: int = 1) -> TightBinding:
    """Ribbon of ``width`` cells, open along lattice direction ``open_axis``, periodic along the
    other.

    Parameters
    ----------
    tb : a 2D model.
    width : number of cells ``W`` across the ribbon (along ``a_open``), ``W >= 1``.
    open_axis : 0 or 1, the lattice direction that is cut; the other one, ``p``, stays periodic.

    Returns
    -------
    TightBinding
        A 1D supercell with ``W * tb.norb`` orbitals, ordered ``I = m * n + o`` with ``m`` the cell
        across the ribbon (``m = 0`` is the edge at the low end of ``a_open``). Its reduced
        momentum is ``k_par = k . a_p`` and, in the same periodic gauge as the bulk,
        ``ribbon(tb, W).bloch(k_par[..., None])`` is the bulk ``H(k)`` with ``k_open`` Fourier
        transformed back to ``W`` open cells. Its lattice vector is ``|a_p|`` and its orbital
        positions are the reduced coordinates along ``a_p``; Cartesian positions across the
        ribbon come from :func:`sample_sites` with a shape that has 1 cell along ``p``. Cell
        operators are repeated on every cell (``1_W (x) op``).
    """
    if tb.dim != 2:
        raise ValueError(f"a ribbon needs a 2D model; this one is {tb.dim}D")
    if open_axis not in (0, 1):
        raise ValueError(f"open_axis must be 0 or 1; got {open_axis}")
    width = int(width)
    if width < 1:
        raise ValueError(f"ribbon width must be at least 1 cell; got {width}")
    par = 1 - open_axis
    onsite = np.kron(np.eye(width), tb.onsite)
    hops: dict[tuple[int, ...], np.ndarray] = {}
    for r, t in tb.hoppings.items():
        block = np.kron(_shift(width, r[open_axis], False).toarray(), t)
        if r[par] == 0:
            # A hopping purely across the ribbon stays inside the supercell.
            onsite = onsite + block + block.conj().T
        else:
            key = (r[par],)
            hops[key] = hops.get(key, 0) + block
    a_par = float(np.linalg.norm(tb.lattice_vectors[par]))
    pos = np.tile(tb.orbital_positions[:, par], width)[:, None]
    ops = {name: np.kron(np.eye(width), op) for name, op in tb.operators.items()}
    return TightBinding(np.array([[a_par]]), pos, onsite, hops, ops)


#: Mesh points per direction on which :func:`spectral_bounds` samples the bulk bands.
BOUNDS_KMESH = 64


def spectral_bounds(tb: TightBinding, n: int = BOUNDS_KMESH) -> tuple[float, float]:
    """An interval that holds the spectrum of every open box of ``tb`` (bulk band range).

    An open box is the compression ``P H P`` of the infinite-lattice operator ``H`` to its
    sites (:func:`open_hamiltonian` only drops the bonds that leave the box), so its levels lie
    in the numerical range of ``H``: between the lowest and the highest bulk band. Those are
    sampled on a uniform ``n^d`` mesh and widened by the largest change between mesh points: a
    level of ``H(k)`` moves no faster than ``||dH/dk_i|| <= sum_R 2 |R_i| ||T_R||_2`` along
    reduced momentum ``k_i``, and every ``k`` is within ``pi / n`` of a mesh point in each
    direction.
    """
    e = np.linalg.eigvalsh(tb.bloch(kmesh(n, tb.dim).reshape(-1, tb.dim)))
    slope = sum(2 * float(np.sum(np.abs(r))) * float(np.linalg.norm(t, 2))
                for r, t in tb.hoppings.items())
    pad = slope * math.pi / n + 1e-12 * (1.0 + float(np.max(np.abs(e))))
    return float(e.min()) - pad, float(e.max()) + pad


def sample_sites(tb: TightBinding, shape: int | Sequence[int]) -> tuple[np.ndarray, np.ndarray]:
    """Cell indices and Cartesian positions of every orbital of a box sample.

    Parameters
    ----------
    tb : the model.
    shape : ``(L_1, ..., L_d)`` cells; for a ribbon use ``W`` along the open direction and 1
        along the periodic one.

    Returns
    -------
    cells : (N, d) int
        Integer cell ``(c_1, ..., c_d)``, ``0 <= c_i < L_i``, of sample orbital ``I``.
    positions : (N, d) float
        Cartesian position ``sum_i (c_i + x_{o, i}) a_i`` (lattice constant 1).
    """
    shape = _shape(tb, shape)
    grid = np.indices(shape).reshape(tb.dim, -1).T  # (ncell, d), C order
    cells = np.repeat(grid, tb.norb, axis=0)
    reduced = cells + np.tile(tb.orbital_positions, (grid.shape[0], 1))
    return cells, reduced @ tb.lattice_vectors


# ----------------------------------------------------------------------------------------------
# Sizing
# ----------------------------------------------------------------------------------------------

def machine_memory() -> float:
    """Physical memory of this machine in bytes (``FALLBACK_MEMORY`` if it cannot be read)."""
    try:
        return float(os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (AttributeError, OSError, ValueError):
        return float(FALLBACK_MEMORY)


def _bandwidth(tb: TightBinding, shape: tuple[int, ...]) -> int:
    """Half-bandwidth of the C-ordered sample matrix (orbitals)."""
    strides = [math.prod(shape[i + 1:]) for i in range(len(shape))]
    reach = max((abs(sum(ri * si for ri, si in zip(r, strides))) for r in tb.hoppings), default=0)
    return tb.norb * (reach + 1)


def memory_estimate(tb: TightBinding, shape: int | Sequence[int], method: str, *,
                    driven: bool = False, nvec: int = 64) -> float:
    """Estimated peak memory (bytes) of finding the in-gap states of an open box sample.

    Parameters
    ----------
    tb, shape : the model and the box of cells (``N = prod(shape) * tb.norb`` orbitals).
    method : ``"dense"`` or ``"sparse"``.
    driven : a periodically driven sample (Floquet operator) rather than a static one.
    nvec : number of Lanczos vectors kept by the sparse method.

    Notes
    -----
    Coefficients (complex128, 16 bytes):

    * dense static: ``5 N^2`` numbers -- the matrix, its copy, the eigenvectors and the
      divide-and-conquer workspace of ``eigh`` (``~2 N^2``);
    * dense driven: ``10 N^2`` -- a dense exponential per step (Pade or eigenbasis, ~6 ``N^2``
      temporaries), the running product ``U``, ``(U + U^dagger)/2`` and its eigenvectors;
    * sparse static: the shift-invert LU factors, bounded by the band profile ``2 N b`` numbers
      with ``b`` the half-bandwidth of the C-ordered matrix (fill-reducing orderings do better,
      so this is an upper bound), plus the matrix and ``nvec`` Lanczos vectors;
    * sparse driven: the step matrices, ``nvec`` Lanczos vectors and ~8 work vectors of the
      Krylov exponential action; no factorisation and no ``N x N`` dense array.
    """
    shape = _shape(tb, shape)
    ncell = math.prod(shape)
    n = ncell * tb.norb
    nnz = ncell * tb.norb**2 * (1 + 2 * len(tb.hoppings))
    csr = 20.0 * nnz + 8.0 * n  # complex value + int32 column per entry, row pointers
    if method == "dense":
        return (10.0 if driven else 5.0) * _C16 * float(n) ** 2
    if method == "sparse":
        vectors = (nvec + 8) * _C16 * float(n)
        if driven:
            return 4 * csr + vectors
        return 2.0 * n * _bandwidth(tb, shape) * (_C16 + 8) + 2 * csr + vectors
    raise ValueError(f"method must be 'dense' or 'sparse'; got {method!r}")


def _describe(tb: TightBinding, shape: tuple[int, ...]) -> str:
    n = math.prod(shape) * tb.norb
    kind = {1: "chain", 2: "flake"}.get(len(shape), "sample")
    return f"{kind} of {' x '.join(map(str, shape))} cells x {tb.norb} orbitals ({n:,} orbitals)"


def check_memory(tb: TightBinding, shape: int | Sequence[int], method: str, *,
                 driven: bool = False, limit: float | None = None) -> float:
    """Raise ``ValueError`` if :func:`memory_estimate` exceeds ``limit`` (default: the machine).

    Returns the estimate (bytes) when it fits. The message names the sample size, the method,
    the estimate and the limit, e.g. ``flake of 2000 x 2000 cells x 4 orbitals (16,000,000
    orbitals) needs about 6.1e+03 GiB with the sparse method; the limit is 23.5 GiB``.
    """
    shape = _shape(tb, shape)
    need = memory_estimate(tb, shape, method, driven=driven)
    have = machine_memory() if limit is None else float(limit)
    if need > have:
        what = "machine's memory" if limit is None else "memory limit"
        raise ValueError(f"{_describe(tb, shape)} needs about {need / 2**30:.3g} GiB with the "
                         f"{method} method; the {what} is {have / 2**30:.3g} GiB. Use a smaller "
                         f"sample.")
    return need


def choose_method(tb: TightBinding, shape: int | Sequence[int], method: str = "auto", *,
                  driven: bool = False, limit: float | None = None,
                  dense_max: int | None = None) -> str:
    """Resolve ``"auto"`` to ``"dense"`` or ``"sparse"`` and check that it fits in memory.

    ``"auto"`` is dense up to ``dense_max`` orbitals (default :data:`DENSE_MAX`, or
    :data:`DENSE_MAX_DRIVEN` for a drive), sparse beyond (or when dense would not fit). Raises
    ``ValueError`` (see :func:`check_memory`) before any matrix is built.
    """
    shape = _shape(tb, shape)
    if method not in ("auto", "dense", "sparse"):
        raise ValueError(f"method must be 'auto', 'dense' or 'sparse'; got {method!r}")
    if dense_max is None:
        dense_max = DENSE_MAX_DRIVEN if driven else DENSE_MAX
    if method == "auto":
        n = math.prod(shape) * tb.norb
        have = machine_memory() if limit is None else float(limit)
        dense_fits = memory_estimate(tb, shape, "dense", driven=driven) <= have
        method = "dense" if n <= dense_max and dense_fits else "sparse"
    check_memory(tb, shape, method, driven=driven, limit=limit)
    return method


# ----------------------------------------------------------------------------------------------
# Polygonal samples
# ----------------------------------------------------------------------------------------------

#: Built-in polygons of unit size: vertices and whether they are in reduced (lattice-vector) or
#: Cartesian coordinates. Scaled by the size, each side is ``size`` cells long on a lattice where
#: the side's lattice vector has length 1 (the triangle and hexagon are regular on the
#: triangular lattice ``a_2 = a_1`` rotated by 60 degrees; the square needs a square lattice).
POLYGONS = {
    "triangle": (((0, 0), (1, 0), (0, 1)), "reduced"),
    "rhombus": (((0, 0), (1, 0), (1, 1), (0, 1)), "reduced"),
    "hexagon": (((1, 0), (0, 1), (-1, 1), (-1, 0), (0, -1), (1, -1)), "reduced"),
    "square": (((0, 0), (1, 0), (1, 1), (0, 1)), "cartesian"),
}
#: Tie-break of the boundary (lattice constants): a site is inside when it is inside after a
#: move by this vector, so a site on a side is kept on the sides that face ``-x`` (and ``-y``)
#: and dropped on the others, like the half-open box ``0 <= c_i < L_i``.
POLYGON_SHIFT = 1e-7 * np.array([1.0, (math.sqrt(5) - 1) / 20])
#: Largest entry of the integer direction searched for a side along a lattice vector.
MAX_SIDE_INDEX = 24


class Polygon:
    """A convex polygon of unit size on the lattice of a 2D model, with its sides' directions.

    Parameters
    ----------
    tb : the 2D model (its lattice vectors).
    vertices : (n, 2) vertices of the unit-size polygon, ``n >= 3``, in either orientation.
    coordinates : ``"reduced"`` (multiples of the lattice vectors) or ``"cartesian"``.

    Raises ``ValueError`` (one sentence) for fewer than 3 vertices, repeated or collinear
    vertices, a polygon that is not convex, or a side that is not along a lattice vector.

    Attributes
    ----------
    vertices : (n, 2) Cartesian vertices at size 1, counter-clockwise.
    directions : (n, 2) int, the primitive lattice vector (reduced) along each side ``j``, from
        vertex ``j`` to vertex ``j + 1``.
    cells_per_unit : (n,) the length of each side at size 1 in units of its primitive lattice
        vector: a side has ``size * cells_per_unit[j]`` cells.
    """

    def __init__(self, tb: TightBinding, vertices, coordinates: str = "reduced") -> None:
        if tb.dim != 2:
            raise ValueError(f"a polygonal sample needs a 2D model; this one is {tb.dim}D")
        v = np.asarray(vertices, dtype=float)
        if v.ndim != 2 or v.shape[1] != 2 or v.shape[0] < 3:
            raise ValueError("a polygon needs at least 3 vertices of 2 coordinates each")
        if coordinates not in ("reduced", "cartesian"):
            raise ValueError(f"coordinates must be 'reduced' or 'cartesian'; got {coordinates!r}")
        a = tb.lattice_vectors
        cart = v @ a if coordinates == "reduced" else v
        edges = np.roll(cart, -1, axis=0) - cart
        scale = float(np.abs(cart).max()) or 1.0
        if np.any(np.linalg.norm(edges, axis=1) <= 1e-9 * scale):
            raise ValueError("a polygon may not repeat a vertex")
        turns = edges[:, 0] * np.roll(edges, -1, axis=0)[:, 1] \
            - edges[:, 1] * np.roll(edges, -1, axis=0)[:, 0]
        area = 0.5 * float(np.sum(cart[:, 0] * np.roll(cart[:, 1], -1)
                                  - cart[:, 1] * np.roll(cart[:, 0], -1)))
        if abs(area) <= 1e-9 * scale**2:
            raise ValueError("a polygon must enclose a nonzero area")
        sign = 1.0 if area > 0 else -1.0
        if np.any(sign * turns <= 1e-9 * scale**2) or \
                abs(np.sum(np.arctan2(sign * turns, np.einsum(
                    "ij,ij->i", edges, np.roll(edges, -1, axis=0))))) > 2 * np.pi + 1e-6:
            raise ValueError("a polygon must be convex, with no three consecutive vertices on "
                             "a line")
        if sign < 0:
            cart = cart[::-1].copy()
            edges = np.roll(cart, -1, axis=0) - cart
        inv = np.linalg.inv(a)
        dirs, lengths = [], []
        for j, e in enumerate(edges):
            d = _lattice_direction(e @ inv)
            if d is None:
                raise ValueError(f"side {j + 1} of the polygon (from {_fmt(cart[j])} to "
                                 f"{_fmt(cart[(j + 1) % len(cart)])}, Cartesian) is not along a "
                                 f"lattice vector, so no ribbon can be cut along it")
            dirs.append(d)
            lengths.append(float(np.linalg.norm(e) / np.linalg.norm(np.asarray(d) @ a)))
        self.vertices = cart
        self.directions = np.array(dirs, dtype=int)
        self.cells_per_unit = np.array(lengths)
        self.lattice = a

    @property
    def n(self) -> int:
        return self.vertices.shape[0]

    def side_cells(self, size: float) -> int:
        """Cells along the shortest side at ``size`` (rounded down)."""
        return int(math.floor(size * float(self.cells_per_unit.min()) + 1e-9))

    def inward_normals(self) -> np.ndarray:
        """(n, 2) unit normals of the sides pointing into the polygon."""
        e = np.roll(self.vertices, -1, axis=0) - self.vertices
        nrm = np.stack([-e[:, 1], e[:, 0]], axis=1)
        return nrm / np.linalg.norm(nrm, axis=1)[:, None]

    def row_spacing(self) -> np.ndarray:
        """(n,) distance between neighbouring lattice rows parallel to each side: the cell
        area over the length of the side's primitive lattice vector."""
        area = abs(float(np.linalg.det(self.lattice)))
        return area / np.linalg.norm(self.directions @ self.lattice, axis=1)

    def inside(self, points: np.ndarray, size: float) -> np.ndarray:
        """Whether Cartesian ``points`` (m, 2) lie inside the polygon scaled by ``size`` (the
        boundary tie-break of :data:`POLYGON_SHIFT`)."""
        q = np.asarray(points, float) + POLYGON_SHIFT
        nrm = self.inward_normals()
        d = np.einsum("mjk,jk->mj", q[:, None, :] - size * self.vertices[None], nrm)
        return np.all(d > 0, axis=1)


def _fmt(x: np.ndarray) -> str:
    return "(" + ", ".join(f"{v:.6g}" for v in x) + ")"


def _lattice_direction(r: np.ndarray) -> tuple[int, int] | None:
    """The primitive integer vector parallel to the reduced vector ``r`` (same sign), or
    ``None`` when no vector with entries up to :data:`MAX_SIDE_INDEX` is parallel to it."""
    norm = float(np.linalg.norm(r))
    best = None
    for m in range(-MAX_SIDE_INDEX, MAX_SIDE_INDEX + 1):
        for n in range(-MAX_SIDE_INDEX, MAX_SIDE_INDEX + 1):
            if (m, n) == (0, 0) or math.gcd(m, n) != 1 or m * r[0] + n * r[1] <= 0:
                continue
            if abs(m * r[1] - n * r[0]) <= 1e-9 * norm * math.hypot(m, n):
                if best is None or abs(m) + abs(n) < abs(best[0]) + abs(best[1]):
                    best = (m, n)
    return best


def polygon_cells(poly: Polygon, size: float) -> tuple[tuple[int, int], tuple[int, int]]:
    """The box of cells ``(offset, shape)`` that covers the polygon scaled by ``size``."""
    red = size * poly.vertices @ np.linalg.inv(poly.lattice)
    low = np.floor(red.min(axis=0) - 1e-6).astype(int) - 1
    high = np.ceil(red.max(axis=0) + 1e-6).astype(int)
    return (int(low[0]), int(low[1])), (int(high[0] - low[0] + 1), int(high[1] - low[1] + 1))


def polygon_sites(tb: TightBinding, poly: Polygon, size: float
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The orbitals of the polygonal sample of ``size``.

    Returns ``(keep, cells, positions)``: ``keep`` indexes the orbitals of the covering box
    (:func:`polygon_cells`, orbital order as for boxes) whose Cartesian position lies inside the
    polygon; ``cells`` (m, 2) are their integer cells (with the box offset) and ``positions``
    (m, 2) their Cartesian positions. Sample orbital ``I`` of a polygon is box orbital
    ``keep[I]``, so orbitals keep the box's C order.
    """
    offset, shape = polygon_cells(poly, size)
    cells, _ = sample_sites(tb, shape)
    cells = cells + np.asarray(offset)
    pos = (cells + np.tile(tb.orbital_positions, (math.prod(shape), 1))) @ tb.lattice_vectors
    keep = np.flatnonzero(poly.inside(pos, size))
    return keep, cells[keep], pos[keep]


def polygon_hamiltonian(tb: TightBinding, poly: Polygon, size: float) -> sp.csr_matrix:
    """Open polygonal sample: the covering box's Hamiltonian restricted to the orbitals inside
    the polygon (every hopping that leaves the polygon is dropped). Orbital order as
    :func:`polygon_sites`."""
    _, shape = polygon_cells(poly, size)
    keep, _, _ = polygon_sites(tb, poly, size)
    h = open_hamiltonian(tb, shape)
    return h[keep][:, keep].tocsr()


def polygon_cuts(poly: Polygon, size: float) -> list[SideCut]:
    """One :class:`SideCut` per side of the polygon scaled by ``size``, a side and its
    anti-parallel partner (if any) sharing one cut."""
    nrm = poly.inward_normals()
    verts = size * poly.vertices
    spacing = poly.row_spacing()
    out: list[SideCut] = []
    done: set[int] = set()
    for j in range(poly.n):
        if j in done:
            continue
        d = tuple(int(x) for x in poly.directions[j])
        partner = next((i for i in range(poly.n) if i != j and
                        tuple(int(x) for x in poly.directions[i]) == (-d[0], -d[1])), None)
        far = None
        if partner is not None:
            done.add(partner)
            dist = float((verts[partner] - verts[j]) @ nrm[j])
            far = dist / spacing[j] - math.floor(dist / spacing[j] + 1e-9)
        out.append(SideCut(d, (float(nrm[j][0]), float(nrm[j][1])),
                           float(verts[j] @ nrm[j]), float(spacing[j]), far))
    return out


class SideCut:
    """The edge of one polygon side, as a ribbon (:func:`cut_ribbon`).

    Attributes
    ----------
    direction : primitive lattice vector (reduced) along the side.
    normal : unit normal into the polygon; offset : ``x . normal`` on the side's line.
    spacing : distance between lattice rows parallel to the side.
    far : ``None`` when the polygon has no side anti-parallel to this one; else the fractional
        part (in rows) of the distance to that side, so the ribbon's far edge is cut as that
        side is.
    """

    def __init__(self, direction: tuple[int, int], normal: tuple[float, float], offset: float,
                 spacing: float, far: float | None) -> None:
        self.direction, self.normal, self.offset = direction, normal, offset
        self.spacing, self.far = spacing, far


def cut_ribbon(tb: TightBinding, cut: SideCut, width: int
               ) -> tuple[TightBinding, np.ndarray | None]:
    """Ribbon periodic along the side of ``cut``, ``width`` rows wide: the orbitals between the
    side's line and a parallel line (kept by the sample's own tie-break,
    :data:`POLYGON_SHIFT`), so its near edge is terminated as the polygon side is.

    The lattice is re-based on ``b_1 = direction`` and a ``b_2`` with ``det = 1`` (the same
    cells) and the rows of ``b_2`` that meet the strip are cut as by :func:`ribbon`, then the
    orbitals outside the strip are dropped. The far line is ``width`` rows away plus the
    fractional row offset of the anti-parallel side (``cut.far``); without one the far edge is
    not a polygon edge and the second value returned marks the ribbon orbitals of the strip's
    far half (levels with most weight there are not the polygon's; ``None`` otherwise).
    """
    m, n = cut.direction
    g, x, y = _egcd(m, n)
    if g != 1:
        raise ValueError(f"direction {cut.direction} is not a primitive lattice vector")
    basis = np.array([[m, n], [-y, x]])
    inv = np.linalg.inv(basis)
    hops: dict[tuple[int, ...], np.ndarray] = {}
    for r, t in tb.hoppings.items():
        rn = tuple(int(v) for v in np.rint(np.asarray(r) @ inv))
        hops[rn] = hops.get(rn, 0) + t
    pos_new = tb.orbital_positions @ inv
    rebased = TightBinding(basis @ tb.lattice_vectors, pos_new, tb.onsite, hops, tb.operators)
    a = rebased.lattice_vectors
    nrm = np.asarray(cut.normal)
    step = float(a[1] @ nrm)  # +-spacing per row of b_2
    base = (pos_new @ a + POLYGON_SHIFT) @ nrm - cut.offset  # orbital distances in row 0
    depth = (width + (cut.far or 0.0)) * cut.spacing
    # Rows m (along b_2) whose orbitals can fall inside 0 < d < depth.
    lo = math.floor(min((-base.max()) / step, (depth - base.min()) / step)) - 1
    hi = math.ceil(max((-base.min()) / step, (depth - base.max()) / step)) + 1
    rows = np.arange(lo, hi + 1)
    d = (rows[:, None] * step + base[None, :]).ravel()
    keep = np.flatnonzero((d > 0) & (d < depth))
    full = ribbon(rebased, rows.size, open_axis=1)
    sub = {r: t[np.ix_(keep, keep)] for r, t in full.hoppings.items()}
    ops = {k: v[np.ix_(keep, keep)] for k, v in full.operators.items()}
    out = TightBinding(full.lattice_vectors, full.orbital_positions[keep],
                       full.onsite[np.ix_(keep, keep)], sub, ops)
    far = None if cut.far is not None else d[keep] > depth / 2
    return out, far


def _egcd(a: int, b: int) -> tuple[int, int, int]:
    """``(g, x, y)`` with ``a x + b y = g = gcd(a, b) >= 0``."""
    if b == 0:
        return (abs(a), 1 if a >= 0 else -1, 0)
    g, x, y = _egcd(b, a % b)
    return g, y, x - (a // b) * y

"""Open samples built from the same :class:`~sweepcli.physics.lattice.TightBinding` as the bulk.

Three geometries, all from ``tb.onsite`` and ``tb.hoppings`` (never a second copy of a model):

* :func:`open_hamiltonian` / :func:`chain` / :func:`flake`: a box of ``L_1 x ... x L_d`` cells,
  open in every direction, as a ``scipy.sparse`` CSR matrix;
* :func:`ribbon`: ``W`` cells open along one lattice direction and periodic along the other,
  returned as a one-dimensional :class:`TightBinding` supercell whose ``bloch(k_par)`` is the
  batched ribbon Hamiltonian ``(..., W n, W n)`` as a function of the momentum along the edge.

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

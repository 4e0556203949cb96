"""The passes over the rows that least squares needs, each streamed in row blocks on up to two threads.

Every pass reads a block of rows of the design X (n x k, intercept first), forms the block of the
shifted, weighted design

    B = sqrt(w) · [1, X₂ - c, y - c_y]                               ((k+1) columns, y last)

in a per-thread buffer and folds it into a small (k+1)-sized result before moving on, so no shifted or
weighted copy of X is ever held. The shift (c, c_y) is the (weighted) mean of the first block: any
shift is an exact reparametrisation of the model, and one close to the mean removes the offset
that makes uncentred sums of squares lose digits (the "shifted data" method of Chan, Golub &
LeVeque 1983, "Algorithms for computing the sample variance", The American Statistician 37(3));
taking it from the first block lets the first pass start without a pass of its own.

- ``gram_pass``: the augmented Gram matrix A = B'B, summed over blocks (one symmetric rank-k
  update per block).
- ``tsqr_pass``: the R factor of B by a tall-skinny QR: a Householder QR of each block (LAPACK
  through numpy.linalg.qr), then one QR of the stacked block factors (Demmel, Grigori, Hoemmen &
  Langou 2012, "Communication-optimal parallel and sequential QR and LU factorizations", SIAM J.
  Sci. Comput. 34(1), the flat-tree TSQR). It is backward stable like a Householder QR of B whole
  (Golub & Van Loan, Matrix Computations, 4th ed., §5.2.2-5.2.3).
- ``residual_pass``: residuals e = y - Xβ for given coefficients, written into an n-vector, with
  the weighted sum of squares Σwe² and the gradient B₁'(sqrt(w)·e) = Z'We of the shifted design,
  which drives a step of iterative refinement. Residuals are formed in the shifted
  parametrisation (e = (y - c_y) - Zγ, rounding error u·|Z||γ| rather than u·|X||β|) or, for
  refinement beyond working precision, in extended precision (numpy.longdouble, 64-bit
  significand on x86) from the raw X and β (Björck 1967, "Iterative refinement of linear least
  squares solutions I", BIT 7; Golub & Van Loan §5.3.8).

Blocks are shared out to ``THREADS`` threads, each taking the next block as it comes free: numpy's
ufuncs and ``numpy.dot`` release the GIL, so the two threads run at once. (The ``@`` operator does
not in numpy 2.4: on 16,384 x 12 blocks two threads of ``b.T @ b`` took 16.5 ms where one took
15.7, and ``np.dot(b.T, b)`` 7.9 ms against 15.9, so the passes' products are written with
``np.dot``.) Per-block results are added in block order, so a result does not depend on
scheduling.

Measured and left out: writing the design's transforms block by block inside the Gram pass (each
column read once) took 23.2 ms against 19.8 ms for the column-wise design then the pass (ten log
columns, 1,000,000 rows, two threads): the per-block numpy calls cost more than the second read of
X. The calling thread taking blocks beside one helper, instead of two pool threads, was faster
back to back (58 against 60 ms a refit) but slower after the machine idled 0.3 s (93 against 69).
"""

from __future__ import annotations

import glob
import os
import threading
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Any, TypeVar

import numpy as np

# Rows per block. 16,384 rows x 14 columns is 1.8 MB: a block's buffer is written and read back
# while it is still in cache. (On the loaded two-core machine, blocks of 8,192 to 65,536 rows
# timed within noise of each other; much smaller blocks pay Python overhead per block.)
BLOCK_ROWS = 16_384
# Threads for the passes: both cores of a small machine. Measured by bench/refit.py on the
# two-core machine while four other processes kept it busy (load average 4.2), fit_ols at
# 1,000,000 rows took 0.053 s on one thread and 0.049 s on two (13 columns), 0.089 s and
# 0.094 s (11 columns): no gain to claim there; the second thread is meant for a machine the app
# has to itself, and the shared block counter keeps a slowed thread from holding a pass back.
THREADS = max(1, min(2, os.cpu_count() or 1))
# Below this many rows a pass runs on the calling thread: starting threads would cost more.
THREADED_MIN_ROWS = 4 * BLOCK_ROWS

T = TypeVar("T")
B = TypeVar("B")
_pool: ThreadPoolExecutor | None = None
_pool_pid = 0
_pool_lock = threading.Lock()


def _executor() -> ThreadPoolExecutor:
    """The passes' thread pool, made on first use; made afresh in a forked child, where the
    parent's pool object survives but its threads do not."""
    global _pool, _pool_pid
    with _pool_lock:
        if _pool is None or _pool_pid != os.getpid() or _pool._max_workers < THREADS:
            _pool = ThreadPoolExecutor(max_workers=THREADS, thread_name_prefix="formwise-pass")
            _pool_pid = os.getpid()
        return _pool


def _blocks(n: int) -> list[tuple[int, int]]:
    return [(start, min(start + BLOCK_ROWS, n)) for start in range(0, n, BLOCK_ROWS)]


def _openblas_thread_controls() -> list[tuple[Callable[[], int], Callable[[int], None]]]:
    """(get, set) for the number of threads of each OpenBLAS that numpy and scipy bundle, found
    by the file names their wheels use (what threadpoolctl looks for); empty when there is none
    (another BLAS, or a platform without these files), and the passes then run as they are."""
    import ctypes

    folders = []
    for package in ("numpy", "scipy"):
        try:
            module = __import__(package)
        except ImportError:  # pragma: no cover - both are dependencies
            continue
        folders.append(os.path.join(os.path.dirname(module.__file__), os.pardir, f"{package}.libs"))
    controls = []
    for path in sorted({p for folder in folders for p in glob.glob(os.path.join(folder, "*openblas*"))}):
        try:
            library = ctypes.CDLL(path)
        except OSError:
            continue
        for get_name, set_name in (
            ("scipy_openblas_get_num_threads64_", "scipy_openblas_set_num_threads64_"),
            ("scipy_openblas_get_num_threads", "scipy_openblas_set_num_threads"),
            ("openblas_get_num_threads64_", "openblas_set_num_threads64_"),
            ("openblas_get_num_threads", "openblas_set_num_threads"),
        ):
            if hasattr(library, get_name) and hasattr(library, set_name):
                getter, setter = getattr(library, get_name), getattr(library, set_name)
                getter.restype = ctypes.c_int
                setter.argtypes = [ctypes.c_int]
                controls.append((getter, setter))
                break
    return controls


class _SingleThreadedBLAS:
    """While any pass runs, BLAS runs on one thread per caller: the passes make their own
    threads, and OpenBLAS's threads on top of them oversubscribe the cores. On a loaded machine
    that oversubscription made a 100,000-row fit 30 times slower (130 ms against 4 ms, measured
    with four other processes busy on the two cores). Nested and concurrent passes share one
    setting; the last to finish restores the caller's."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._depth = 0
        self._saved: list[int] = []
        self._controls: list[tuple[Callable[[], int], Callable[[int], None]]] | None = None

    def __enter__(self) -> None:
        with self._lock:
            if self._controls is None:
                self._controls = _openblas_thread_controls()
            if self._depth == 0:
                self._saved = [int(get()) for get, _ in self._controls]
                for _, set_threads in self._controls:
                    set_threads(1)
            self._depth += 1

    def __exit__(self, *exc: object) -> None:
        with self._lock:
            self._depth -= 1
            if self._depth == 0:
                for (_, set_threads), count in zip(self._controls or [], self._saved, strict=False):
                    set_threads(count)


single_threaded_blas = _SingleThreadedBLAS()


def _run(n: int, make_buffer: Callable[[], np.ndarray], one: Callable[[np.ndarray, int, int], T]) -> list[T]:
    """``one(buffer, start, stop)`` on every row block, results in block order.

    The threads take the next block from a shared counter as they come free, so a thread slowed
    by other work on the machine does not hold the pass back; the callers add the per-block
    results in block order, so the sums do not depend on which thread took which block."""
    blocks = _blocks(n)
    with single_threaded_blas:
        return _share(len(blocks), n >= THREADED_MIN_ROWS, make_buffer, lambda buffer, i: one(buffer, *blocks[i]))


def each_column(tasks: list[Callable[[], T]], rows: int) -> list[T]:
    """Independent whole-column jobs (a transform written into its design column, a column's
    conversion), on the passes' threads when the columns are long; the results in task order.
    The jobs should spend their time in numpy calls that release the GIL. If jobs raise, the
    error of the first in task order is raised, as a loop over them would."""

    def guarded(_: None, i: int) -> tuple[bool, Any]:
        try:
            return True, tasks[i]()
        except Exception as error:  # re-raised below, in task order
            return False, error

    outcomes = _share(len(tasks), rows >= THREADED_MIN_ROWS, lambda: None, guarded)
    for ok, value in outcomes:
        if not ok:
            raise value
    return [value for _, value in outcomes]


def each_chunk(n: int, size: int, one: Callable[[int, int], T]) -> list[T]:
    """``one(start, stop)`` on row chunks of ``size`` rows (for passes of other modules whose
    chunks are not the design's blocks), on the passes' threads; the results in chunk order, so
    a caller adding them up gets sums that do not depend on the threads' timing."""
    chunks = [(start, min(start + size, n)) for start in range(0, n, size)]
    with single_threaded_blas:
        return _share(len(chunks), n >= THREADED_MIN_ROWS, lambda: None, lambda _, i: one(*chunks[i]))


def _share(jobs: int, threaded: bool, make_buffer: Callable[[], B], one: Callable[[B, int], T]) -> list[T]:
    """``one(buffer, i)`` for i in range(jobs), each thread with its own buffer; in order."""
    if THREADS == 1 or not threaded or jobs < 2:
        buffer = make_buffer()
        with np.errstate(over="ignore", invalid="ignore"):  # the caller checks for non-finite sums
            return [one(buffer, i) for i in range(jobs)]
    results: list[T | None] = [None] * jobs
    counter = iter(range(jobs))
    lock = threading.Lock()

    def worker() -> None:
        buffer = make_buffer()
        with np.errstate(over="ignore", invalid="ignore"):  # numpy's error state is per thread
            while True:
                with lock:
                    i = next(counter, None)
                if i is None:
                    return
                results[i] = one(buffer, i)

    for future in [_executor().submit(worker) for _ in range(min(THREADS, jobs))]:
        future.result()
    return results  # type: ignore[return-value]


@dataclass(frozen=True)
class Shift:
    """The shifted, weighted design B = sqrt(w)·[1, X₂ - c, y - c_y] (see the module docstring)."""

    X: np.ndarray
    y: np.ndarray
    root_w: np.ndarray | None
    c: np.ndarray  # shift per column of X, c[0] = 0 (the intercept is not shifted)
    c_y: float
    w: np.ndarray | None = None  # the weights themselves (root_w² would round)

    @property
    def n(self) -> int:
        return self.X.shape[0]

    @property
    def k(self) -> int:
        return self.X.shape[1]

    def fill(self, buffer: np.ndarray, start: int, stop: int) -> np.ndarray:
        """B for rows start:stop, written into ``buffer`` (BLOCK_ROWS x (k+1), Fortran order)."""
        k = self.k
        out = buffer[: stop - start]
        self._slopes(out, start, stop)
        np.subtract(self.y[start:stop], self.c_y, out=out[:, k])
        if self.root_w is None:
            out[:, 0] = 1.0
        else:
            root = self.root_w[start:stop]
            out[:, 0] = root
            out[:, 1:] *= root[:, None]
        return out

    def _slopes(self, out: np.ndarray, start: int, stop: int) -> None:
        """Columns 1 to k-1 of B before the weights: X₂ - c for rows start:stop."""
        np.subtract(self.X[start:stop, 1:], self.c[1:], out=out[:, 1 : self.k])

    def buffer(self) -> np.ndarray:
        return np.empty((min(BLOCK_ROWS, self.n), self.k + 1), order="F")


def shift_for(X: np.ndarray, y: np.ndarray, weights: np.ndarray | None) -> Shift:
    """The shift from the (weighted) means of the first block of rows."""
    head = slice(0, min(BLOCK_ROWS, X.shape[0]))
    if weights is None:
        c = X[head].mean(axis=0)
        c_y = float(y[head].mean())
    else:
        w = weights[head]
        c = X[head].T @ w / w.sum()
        c_y = float(y[head] @ w / w.sum())
    c = np.array(c, dtype=float)
    c[0] = 0.0
    return Shift(X, y, None if weights is None else np.sqrt(weights), c, c_y, weights)


@dataclass(frozen=True)
class ColumnShift(Shift):
    """``Shift`` over a design held as separate columns (``X`` a tuple of n-vectors, the first
    standing for the intercept and never read), so that a wide table of columns, most of them
    views of arrays that exist already, need not be copied into one n x k array first; the
    blocks it fills are those of ``Shift`` on that array."""

    @property
    def n(self) -> int:
        return len(self.y)

    @property
    def k(self) -> int:
        return len(self.X)

    def _slopes(self, out: np.ndarray, start: int, stop: int) -> None:
        for j in range(1, self.k):
            np.subtract(self.X[j][start:stop], self.c[j], out=out[:, j])


def column_shift_for(columns: tuple[np.ndarray, ...], y: np.ndarray, weights: np.ndarray | None) -> ColumnShift:
    """``shift_for`` for a design held as separate columns (see ``ColumnShift``)."""
    head = slice(0, min(BLOCK_ROWS, len(y)))
    w = None if weights is None else weights[head]
    c = np.zeros(len(columns))
    for j in range(1, len(columns)):
        part = columns[j][head]
        c[j] = float(part.mean()) if w is None else float(part @ w / w.sum())
    c_y = float(y[head].mean()) if w is None else float(y[head] @ w / w.sum())
    return ColumnShift(columns, y, None if weights is None else np.sqrt(weights), c, c_y, weights)


def gram_pass(shift: Shift) -> np.ndarray:
    """A = B'B, the (k+1) x (k+1) Gram matrix of the shifted, weighted design and outcome."""

    def one(buffer: np.ndarray, start: int, stop: int) -> np.ndarray:
        block = shift.fill(buffer, start, stop)
        return np.dot(block.T, block)  # BLAS syrk (one triangle, mirrored); see the module docstring

    total = np.zeros((shift.k + 1, shift.k + 1))
    for part in _run(shift.n, shift.buffer, one):
        total += part
    return total


def tsqr_pass(shift: Shift) -> np.ndarray:
    """R ((k+1) x (k+1), upper triangular) with B = QR, by the flat-tree TSQR."""

    def one(buffer: np.ndarray, start: int, stop: int) -> np.ndarray:
        return np.linalg.qr(shift.fill(buffer, start, stop), mode="r")

    factors = _run(shift.n, shift.buffer, one)
    if len(factors) == 1:
        return _square(factors[0], shift.k + 1)
    return _square(np.linalg.qr(np.vstack(factors), mode="r"), shift.k + 1)


def _square(r: np.ndarray, size: int) -> np.ndarray:
    """R padded to size x size (a block with fewer rows than columns gives a short R)."""
    if r.shape[0] == size:
        return r
    out = np.zeros((size, size))
    out[: r.shape[0]] = r
    return out


@dataclass
class ResidualPass:
    """What one residual pass gives: Z'We and Σwe² (see ``residual_pass``), and, when asked
    for, the score Gram Σ (wᵢeᵢ)² xᵢxᵢ' of the original design (the meat of HC0/HC1)."""

    grad: np.ndarray
    ssr: float
    score_gram: np.ndarray | None = None


def residual_pass(
    shift: Shift,
    gamma: np.ndarray,
    beta: np.ndarray,
    resid: np.ndarray,
    extended: bool,
    fitted: np.ndarray | None = None,
    scores: bool = False,
) -> ResidualPass:
    """Residuals into ``resid`` (unweighted, y - Xβ), the fitted values y - e into ``fitted``
    when given, and (Z'We, Σwe²); with ``scores`` also the score Gram.

    ``gamma`` are the coefficients in the shifted parametrisation (y - c_y ≈ Zγ, Z = [1, X₂ - c])
    and ``beta`` the same in the original one; the residuals come from γ in working precision, or
    from β in extended precision when ``extended`` (no score Gram then: the caller's covariance
    makes its own pass). The score Gram is summed in the shifted parametrisation while each
    block is in cache, S = Σ (wᵢeᵢ)² zᵢzᵢ', and mapped back exactly: x = M'z with
    M = [[1, c₂'], [0, I]], so Σ (wᵢeᵢ)² xᵢxᵢ' = M'SM. That spares the covariance a pass of its
    own over X.
    """
    X, y, k = shift.X, shift.y, shift.k
    weights = shift.w
    beta_ext = beta.astype(np.longdouble)
    slope = np.ascontiguousarray(gamma[1:])
    offset = shift.c_y + float(gamma[0])
    scores = scores and not extended

    def buffer() -> np.ndarray:
        # Z's slope columns, then (with scores) a block of k columns for the scores [1, z]·we.
        return np.empty((min(BLOCK_ROWS, shift.n), 2 * k - 1 if scores else k - 1), order="F")

    def _write_fitted(start: int, stop: int) -> None:
        if fitted is not None:
            np.subtract(y[start:stop], resid[start:stop], out=fitted[start:stop])

    def one(z: np.ndarray, start: int, stop: int) -> tuple[np.ndarray, float, np.ndarray | None]:
        rows = stop - start
        zc = z[:rows, : k - 1]
        e = resid[start:stop]
        if extended:
            # y - Xβ and X'We with a 64-bit significand: both are small differences of large
            # terms near the solution, and working precision would bound the refinement at
            # the κ²u·|e| level of a QR solution.
            x_ext = X[start:stop].astype(np.longdouble)
            e_ext = y[start:stop] - x_ext @ beta_ext
            we_ext = e_ext if weights is None else weights[start:stop] * e_ext
            e[:] = e_ext
            _write_fitted(start, stop)
            return x_ext.T @ we_ext, float(e_ext @ we_ext), None
        np.subtract(X[start:stop, 1:], shift.c[1:], out=zc)
        np.subtract(y[start:stop], offset, out=e)
        e -= np.dot(zc, slope)
        _write_fitted(start, stop)
        we = e if weights is None else weights[start:stop] * e
        grad = np.empty(k)
        grad[0] = we.sum()
        grad[1:] = np.dot(zc.T, we)
        gram = None
        if scores:
            s = z[:rows, k - 1 :]
            s[:, 0] = we
            np.multiply(zc, we[:, None], out=s[:, 1:])
            gram = np.dot(s.T, s)  # BLAS syrk, as in gram_pass
        return grad, float(np.dot(e, we)), gram

    parts = _run(shift.n, buffer, one)
    ssr = 0.0
    if extended:
        total = np.zeros(k, dtype=np.longdouble)
        for g, s, _ in parts:
            total += g
            ssr += s
        # X'We to Z'We = T⁻ᵀX'We: (Z'We)₂ = (X'We)₂ - c·(X'We)₀, still in extended precision.
        grad = np.empty(k)
        grad[0] = total[0]
        grad[1:] = total[1:] - shift.c[1:].astype(np.longdouble) * total[0]
        return ResidualPass(grad, ssr)
    grad = np.zeros(k)
    shifted_scores = np.zeros((k, k)) if scores else None
    for g, s, gram in parts:
        grad += g
        ssr += s
        if shifted_scores is not None:
            shifted_scores += gram
    if shifted_scores is None:
        return ResidualPass(grad, ssr)
    back = np.eye(k)
    back[0, 1:] = shift.c[1:]
    return ResidualPass(grad, ssr, back.T @ shifted_scores @ back)


def scaled_cross_products(X: np.ndarray, factor: np.ndarray) -> np.ndarray:
    """S'S for the rows sᵢ = fᵢ·xᵢ of X scaled by ``factor`` f (the meat of the
    heteroskedasticity-robust covariances): each block's S is formed in a per-thread buffer and
    folded in by one symmetric rank-k update, so no n x k array of scores is held."""
    n, k = X.shape

    def buffer() -> np.ndarray:
        return np.empty((min(BLOCK_ROWS, n), k), order="F")

    def one(scores: np.ndarray, start: int, stop: int) -> np.ndarray:
        s = scores[: stop - start]
        np.multiply(X[start:stop], factor[start:stop, None], out=s)
        return np.dot(s.T, s)

    total = np.zeros((k, k))
    for part in _run(n, buffer, one):
        total += part
    return total


def map_blocks(shift: Shift, one: Callable[[np.ndarray, int, int], T]) -> list[T]:
    """``one(block, start, stop)`` on every row block of the shifted design B (see ``Shift.fill``),
    on the passes' threads; the results in block order (for passes of other modules, such as the
    sweep's one pass over all its models)."""

    def filled(buffer: np.ndarray, start: int, stop: int) -> T:
        return one(shift.fill(buffer, start, stop), start, stop)

    return _run(shift.n, shift.buffer, filled)

"""From a parsed spec and a data frame to the design matrix: the one place that does it.

Rows a transform cannot take, and rows with missing or infinite cells, are dropped and
counted per column and reason, never silently. The ``Encoder`` maps original-unit values
of the regressors to design rows; fitting, effects, curves and predictions all use it, so
the model is evaluated exactly as it was estimated.

At a million rows: category columns are turned into integer codes once (pandas.factorize;
a level's name is str() of the cell) and counted with numpy.bincount; the design matrix is
column-major (Fortran order), so each block writes whole columns and the row-chunked passes
of the fit read every column of a chunk; with no row dropped no column is gathered.
"""

from __future__ import annotations

import functools
import math
import threading
import weakref
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from core.errors import DataError
from core.model import engine
from core.model.absorb import Absorbed, absorb, singleton_rows
from core.model.spec import ModelSpec, RegressorSpec
from core.model.transforms import Category, Transform

# Budgets checked before the design is built (``check_budget``): the design matrix (n x width
# numbers; the fit holds about two copies) and the width x width cross products, whose solves and
# per-column effects grow with width² and width³ (1,000 columns: about 8 MB each).
DESIGN_MAX_BYTES = 1_000_000_000
GRAM_MAX_BYTES = 8_000_000
# And the time: a fit with its checks, effects and curves does about n·width² multiply-adds in its
# passes over the rows and 12·width³ in its width x width factorisations (the covariance, the
# checks, the collinearity screen), at WORK_PER_SECOND; measured on a loaded 2-core machine
# (December 2026): 50,000 rows x 400 columns in 3.5 s, 2,000 x 900 in 4.6 s, 2,000 x 498 in
# 1.7 s for every part of core.analyze. A model estimated past TIME_MAX_SECONDS is refused.
TIME_MAX_SECONDS = 10.0
WORK_PER_SECOND = 2.3e9


@dataclass(frozen=True)
class Term:
    """One design column: the intercept, a transformed regressor, a square, a dummy, or (with
    ``by``) one of those times a column of the moderator ``by`` (its level ``by_level``)."""

    name: str
    column: str | None
    transform: str | None
    level: str | None = None
    power: int | None = None
    by: str | None = None
    by_level: str | None = None


@dataclass
class Block:
    """The design columns of one regressor: positions in X and, for categories, the levels."""

    spec: RegressorSpec
    start: int
    stop: int
    levels: list[str] = field(default_factory=list)  # category levels other than the reference
    reference_level: str | None = None
    binary: bool = False

    @property
    def is_category(self) -> bool:
        return isinstance(self.spec.transform, Category)


@dataclass(frozen=True)
class Product:
    """The design columns of a regressor crossed with its moderator ``by``: column
    ``start + i*q + j`` is the regressor's design column i times the moderator's column j, row
    by row (q the moderator's width), so any transform pair crosses the same way."""

    column: str
    by: str
    start: int
    stop: int


@dataclass
class Coded:
    """A category column as integer codes, one per row, and the level name of each code.

    The level name of a cell is ``str`` of its value; distinct codes have distinct names.
    """

    codes: np.ndarray  # intp; -1 for a missing cell
    names: np.ndarray  # str array, one name per code
    blank: int = 0  # cells whose name is empty or only spaces: coded -1, as missing

    @functools.cached_property
    def row_names(self) -> np.ndarray:
        """The level name of every row, read-only and kept with the codes (the column cache
        keeps both): a design over every row needs it at each refit, and taking a million
        names costs about 12 ms. Only for a column with no missing cell (code -1)."""
        out = self.names[self.codes]
        out.flags.writeable = False
        return out


@dataclass
class Encoder:
    """Maps original-unit regressor values to design rows (intercept first, then one block per
    regressor, then the products of crossed regressors)."""

    blocks: list[Block]
    width: int
    products: list[Product] = field(default_factory=list)

    def encode(
        self,
        values: dict[str, Any],
        n: int,
        codes: dict[str, Coded] | None = None,
        bases: dict[str, np.ndarray] | None = None,
    ) -> np.ndarray:
        """Design rows for n points; each value is an array of n or a scalar shared by all.

        X is allocated in Fortran (column-major) order: every block writes whole columns, and
        the fit reads row chunks of all columns. ``codes`` may give, per category column, the
        rows' integer codes and the level name of each code (what ``build_design`` already
        has), so the dummies come from integer comparisons instead of string ones. ``bases``
        may give, per numeric column, its design columns for these n rows already computed.
        """
        return self.encode_beside(values, n, codes, bases)[0]

    def encode_beside(
        self,
        values: dict[str, Any],
        n: int,
        codes: dict[str, Coded] | None = None,
        bases: dict[str, np.ndarray] | None = None,
        beside: Callable[[], Any] | None = None,
    ) -> tuple[np.ndarray, Any]:
        """``encode``, with one more job (``beside``, such as the outcome's transform) run on the
        same threads as the blocks; X and that job's result (None without one)."""
        X = np.empty((n, self.width), order="F")
        X[:, 0] = 1.0
        # Blocks write disjoint columns, so long ones are written on the passes' threads.
        jobs = [functools.partial(self.fill, X, block, values, codes, bases) for block in self.blocks]
        done = engine.each_column([*jobs, beside or (lambda: None)], n)
        if self.products:  # read the blocks just written
            engine.each_column([functools.partial(self.fill_product, X, p) for p in self.products], n)
        return X, done[-1]

    def fill_product(self, X: np.ndarray, product: Product) -> None:
        """Write a product's columns of X from the two blocks' columns already in X."""
        left, right = self.block(product.column), self.block(product.by)
        q = right.stop - right.start
        for i in range(left.stop - left.start):
            start = product.start + i * q
            np.multiply(X[:, right.start : right.stop], X[:, left.start + i, None], out=X[:, start : start + q])

    def crossed(self, column: str) -> list[Product]:
        """The products ``column`` enters, as the regressor or as the moderator."""
        return [p for p in self.products if column in (p.column, p.by)]

    def columns_of(self, column: str) -> np.ndarray:
        """Every design column that moves with ``column``: its block and its products."""
        block = self.block(column)
        spans = [range(block.start, block.stop), *(range(p.start, p.stop) for p in self.crossed(column))]
        return np.array([i for span in spans for i in span], dtype=np.intp)

    def basis_coefficients(self, column: str, X: np.ndarray, coef: np.ndarray) -> np.ndarray:
        """Per row of X, the coefficient on each of ``column``'s design columns once its products
        are read at that row's other factor: ∂η/∂basisₖ = b_k + Σ_products b_(k,j)·other_j,
        shape (rows, block width). Without products every row is the block's coefficients."""
        block = self.block(column)
        width = block.stop - block.start
        out = np.tile(coef[block.start : block.stop], (X.shape[0], 1))
        for p in self.crossed(column):
            left, right = self.block(p.column), self.block(p.by)
            q = right.stop - right.start
            b = coef[p.start : p.stop].reshape(left.stop - left.start, q)  # row i: left column i
            if p.column == column:
                out += X[:, right.start : right.stop] @ b.T
            else:
                out += X[:, left.start : left.stop] @ b
        return out.reshape(X.shape[0], width)

    def fill(
        self,
        X: np.ndarray,
        block: Block,
        values: dict[str, Any],
        codes: dict[str, Coded] | None = None,
        bases: dict[str, np.ndarray] | None = None,
    ) -> None:
        """Write one block's design columns of X (n rows) from ``values`` (see ``encode``)."""
        n = X.shape[0]
        column = block.spec.column
        if block.is_category:
            coded = codes.get(column) if codes else None
            if coded is not None:
                position = {name: i for i, name in enumerate(coded.names)}
                for j, level in enumerate(block.levels):
                    code = position.get(level)
                    if code is None:
                        X[:, block.start + j] = 0.0
                    else:
                        np.equal(coded.codes, code, out=X[:, block.start + j], casting="unsafe")
                return
            labels = np.broadcast_to(np.asarray(values[column]).astype(str), (n,))
            for j, level in enumerate(block.levels):
                X[:, block.start + j] = labels == level
        elif bases is not None and column in bases:
            X[:, block.start : block.stop] = bases[column]
        else:
            numbers = np.broadcast_to(np.asarray(values[column], dtype=float), (n,))
            block.spec.transform.write_basis(numbers, X[:, block.start : block.stop])

    def index_slope(self, column: str, x: np.ndarray, X: np.ndarray, coef: np.ndarray) -> np.ndarray:
        """dη/dx of a numeric regressor at x (one value per row of X, the design rows at x):
        d(basis)/dx times the coefficients its products give at each row."""
        d_basis = self.block(column).spec.transform.basis_derivative(np.asarray(x, dtype=float))
        return np.einsum("ij,ij->i", d_basis, self.basis_coefficients(column, X, coef))

    def block(self, column: str) -> Block:
        for block in self.blocks:
            if block.spec.column == column:
                return block
        raise KeyError(column)


@dataclass
class Design:
    y: np.ndarray  # transformed outcome
    y_raw: np.ndarray  # outcome in original units
    X: np.ndarray
    terms: list[Term]
    encoder: Encoder
    values: dict[str, np.ndarray]  # regressors in original units (str for categories), used rows
    weights: np.ndarray | None
    groups: np.ndarray | None
    rows: np.ndarray  # positions of the used rows in the user's data (0-based)
    n_total: int
    dropped: list[dict[str, Any]]
    warnings: list[str]
    reference: dict[str, Any]
    time: np.ndarray | None = None  # period number of each used row (0 = the first used), see ``periods``
    groups_second: np.ndarray | None = None  # the second grouping of two-way clustered errors
    absorbed: Absorbed | None = None  # the fixed effects swept out of X (core.model.absorb)
    resample_groups: np.ndarray | None = None  # the bootstrap's cluster labels, used rows
    ranges: dict[str, tuple[float, float]] = field(default_factory=dict)  # numeric regressors, used rows

    def observed_range(self, column: str) -> tuple[float, float]:
        """The smallest and largest value of a numeric regressor on the rows used."""
        if column not in self.ranges:
            self.ranges[column] = _value_range(np.asarray(self.values[column], dtype=float))
        return self.ranges[column]


def _numeric(series: pd.Series, column: str) -> np.ndarray:
    """The column as floats; text that is not a number is an error naming the rows."""
    if pd.api.types.is_bool_dtype(series):
        return series.astype(float).to_numpy()
    if pd.api.types.is_numeric_dtype(series):
        return series.to_numpy(dtype=float, na_value=np.nan)
    converted = pd.to_numeric(series, errors="coerce")
    bad = converted.isna() & series.notna()
    if bad.any():
        positions = np.flatnonzero(bad.to_numpy())
        examples = ", ".join(f"row {p + 1} ('{str(series.iloc[p])[:20]}')" for p in positions[:3])
        more = f" and {len(positions) - 3} more" if len(positions) > 3 else ""
        raise DataError(
            f"column '{column}' is used as a number but holds text: {examples}{more}. "
            "Fix or blank those cells, or use the column as a category."
        )
    return converted.to_numpy(dtype=float, na_value=np.nan)


def _zero_one(x: np.ndarray) -> bool:
    """Whether every value is 0 or 1 (a dummy); most columns fail on their first rows."""
    head = x[:256]
    if not ((head == 0.0) | (head == 1.0)).all():
        return False
    return bool(((x == 0.0) | (x == 1.0)).all())


def _category_codes(series: pd.Series) -> Coded:
    """Integer codes of a category column (pandas.factorize) and the name, ``str(value)``, of
    each code. Codes are -1 exactly where the cell is missing (``Series.isna``).

    factorize treats equal values as one, so where equal values print differently (1, 1.0 and
    True in one object column; 0.0 and -0.0) the names are taken from the cells' text instead.
    Names that coincide (a categorical's 1 and "1") share one code.
    """
    missing = series.isna().to_numpy()
    codes, uniques = pd.factorize(series, use_na_sentinel=True)
    originals = np.asarray(uniques, dtype=object)
    if series.dtype == object:
        by_value = pd.api.types.infer_dtype(originals, skipna=False) in ("string", "integer", "boolean", "empty")
    elif pd.api.types.is_float_dtype(series.dtype) and bool((originals == 0).any()):
        numbers = series.to_numpy(dtype=float, na_value=np.nan)
        signs = np.signbit(numbers[numbers == 0])
        by_value = bool(signs.all()) or not bool(signs.any())
    else:
        by_value = True
    if not by_value or bool((codes[~missing] < 0).any()):
        text = np.asarray(series.astype(object), dtype=object).astype(str)
        codes, uniques = pd.factorize(text)
        originals = np.asarray(uniques, dtype=object)
    names = originals.astype(str) if len(originals) else np.array([], dtype=str)
    distinct, position = pd.factorize(names)
    if len(position) < len(names):
        codes = np.where(codes >= 0, distinct[np.maximum(codes, 0)], -1)
        names = np.asarray(position, dtype=object).astype(str)
    codes = np.asarray(codes, dtype=np.intp)
    codes[missing] = -1
    # A level named by nothing ("" or only spaces) cannot be told apart on screen or named in a
    # spec: such cells count as missing, as the reader takes blank text cells (core.intake.reader).
    blank_names = np.char.strip(names.astype(str)) == "" if len(names) else np.zeros(0, dtype=bool)
    blank = 0
    if blank_names.any():
        cells = (codes >= 0) & blank_names[np.maximum(codes, 0)]
        blank = int(np.count_nonzero(cells))
        codes[cells] = -1
    return Coded(codes, names, blank)


class ColumnCache:
    """Columns of one table converted and transformed once, for the refits of an edit loop
    that changes one transform at a time: per column its numbers and finite mask, or its
    category codes; per (column, transform) the rows the transform cannot take and the
    transformed values over all rows. Every cached array is read-only, so no caller can alter
    a cached value (a design hands them on as they are, read-only).

    It serves one table at a time, which must not be edited in place while cached (the app
    never edits a loaded table); given another table object it starts afresh. At most
    ``max_bytes`` of arrays are kept, the least recently used going first.
    """

    def __init__(self, max_bytes: int = 256 * 10**6) -> None:
        self.max_bytes = max_bytes
        self.hits = 0
        self.misses = 0
        self._table: weakref.ref[pd.DataFrame] | None = None
        self._entries: OrderedDict[tuple[Any, ...], tuple[Any, int]] = OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()

    def get(self, data: pd.DataFrame, key: tuple[Any, ...], make: Callable[[], Any]) -> Any:
        """The cached value for ``key`` on ``data``, made by ``make()`` on a miss. An error
        raised by ``make`` is raised to the caller and nothing is cached."""
        with self._lock:
            if self._table is None or self._table() is not data:
                self._entries.clear()
                self._bytes = 0
                self._table = weakref.ref(data)
            if key in self._entries:
                self._entries.move_to_end(key)
                self.hits += 1
                return self._entries[key][0]
        value = make()  # outside the lock: a million-row transform need not block other sessions
        size = _freeze(value)
        with self._lock:
            self.misses += 1
            if self._table() is data and key not in self._entries and size <= self.max_bytes:
                self._entries[key] = (value, size)
                self._bytes += size
                while self._bytes > self.max_bytes:
                    _, (_, dropped) = self._entries.popitem(last=False)
                    self._bytes -= dropped
        return value


def _freeze(value: Any) -> int:
    """Make every array in ``value`` (an array, a tuple or a ``Coded``) read-only; their bytes."""
    if isinstance(value, np.ndarray):
        value.flags.writeable = False
        return value.nbytes
    if isinstance(value, Coded):
        return _freeze(value.codes) + _freeze(value.names)
    if isinstance(value, Numbers):
        return _freeze(value.values) + (0 if value.finite is None else _freeze(value.finite))
    if isinstance(value, tuple):
        return sum(_freeze(v) for v in value)
    return 0


@dataclass(frozen=True)
class Numbers:
    """A numeric column over every row: its values, the mask of finite ones (None when every
    value is finite) and the smallest and largest value.

    The range answers most questions about a column in one pass and without a row mask: a
    finite minimum and maximum mean every value is finite (numpy's min and max propagate
    NaN, and an infinity is an extreme), and every transform's domain is an interval, so a
    range inside it means no row falls outside (``_drop_outside_domains``)."""

    values: np.ndarray
    finite: np.ndarray | None
    low: float
    high: float
    # numpy.mean over every row when every value is finite (taken while the column is fresh in
    # cache after its range; a reference point over every row reads it), else NaN.
    mean: float = math.nan

    @property
    def all_finite(self) -> bool:
        return self.finite is None


def _numbers_and_finite(series: pd.Series, column: str) -> Numbers:
    values = _numeric(series, column)
    low, high = _value_range(values)
    if math.isfinite(low) and math.isfinite(high):
        return Numbers(values, None, low, high, float(np.mean(values)))
    finite = np.isfinite(values)
    kept = values[finite]
    low, high = _value_range(kept) if len(kept) else (math.nan, math.nan)
    return Numbers(values, finite, low, high)


def _means_taken(found: _Columns, columns: list[str]) -> dict[str, float]:
    """The means ``Numbers`` took over every row (only finite ones: a column with a missing or
    infinite cell has none, and its reference value is then taken afresh)."""
    return {c: found.numbers[c].mean for c in columns if math.isfinite(found.numbers[c].mean)}


@functools.lru_cache(maxsize=4)
def _every_row(n: int) -> np.ndarray:
    """0, 1, ..., n-1, read-only and kept: the rows of a design that dropped none (most refits)."""
    rows = np.arange(n)
    rows.flags.writeable = False
    return rows


def _value_range(x: np.ndarray) -> tuple[float, float]:
    if len(x) == 0:
        return math.nan, math.nan
    with np.errstate(invalid="ignore"):
        return float(np.min(x)), float(np.max(x))


def _basis_all_rows(transform: Transform, x: np.ndarray) -> np.ndarray:
    """A regressor's design columns over every row, rows it cannot take included (they are
    dropped before use)."""
    with np.errstate(all="ignore"):
        return np.ascontiguousarray(transform.basis(x))


def _forward_all_rows(transform: Transform, x: np.ndarray) -> np.ndarray:
    with np.errstate(all="ignore"):
        return np.asarray(transform.forward(x), dtype=float)


SINGLETON = "alone in its level of an absorbed identifier (singleton)"


class _Drops:
    """The rows kept so far, and each reason rows were dropped, counted per column."""

    def __init__(self, n_total: int) -> None:
        self.keep = np.ones(n_total, dtype=bool)
        self.dropped: list[dict[str, Any]] = []
        self.notes: list[str] = []  # more words on rows dropped, after the counts

    def drop(self, mask: np.ndarray, column: str, reason: str) -> None:
        count = int(np.count_nonzero(mask))
        if count:
            self.dropped.append({"column": column, "reason": reason, "count": count})
            self.keep[mask] = False

    def warnings(self, weights: str | None) -> list[str]:
        """A sentence per reason other than missing or infinite cells, and one for those."""
        out = []
        for entry in self.dropped:
            if entry["reason"] == SINGLETON:
                continue  # said in the notes
            if entry["column"] == weights and entry["reason"] == "weights must be above zero":
                out.append(f"{entry['count']} row(s) dropped because their weight in '{weights}' is zero or negative.")
            elif entry["reason"] not in ("missing value", "infinite value"):
                other = "level or inverse hyperbolic sine (ihs)" if "log" in entry["reason"] else "level"
                out.append(
                    f"{entry['count']} row(s) dropped because {entry['reason']} in '{entry['column']}'; "
                    f"consider the {other} transform to keep them."
                )
        missing = sum(e["count"] for e in self.dropped if e["reason"] == "missing value")
        if missing:
            out.append(f"rows with missing cells in the model's columns were dropped ({missing} missing cell(s) in all).")
        return out + self.notes


@dataclass
class _Columns:
    """The model's columns over every row: numbers and their finite mask, category codes, and
    the cluster labels (kept apart: the cluster column may also be a numeric regressor)."""

    raw: dict[str, np.ndarray] = field(default_factory=dict)
    numbers: dict[str, Numbers] = field(default_factory=dict)
    coded: dict[str, Coded] = field(default_factory=dict)
    groups: np.ndarray | None = None
    groups_second: np.ndarray | None = None
    resample_groups: np.ndarray | None = None
    absorbed: dict[str, Coded] = field(default_factory=dict)  # the absorbed identifiers' codes


def _read_columns(data: pd.DataFrame, spec: ModelSpec, drops: _Drops, cached: Callable[..., Any]) -> _Columns:
    """Convert each used column once (numbers or category codes) and drop missing and infinite cells."""
    found = _Columns()
    categories = {r.column for r in spec.regressors if isinstance(r.transform, Category)}
    # Cluster labels as integer codes (cached: a million text labels take 0.1 s to convert);
    # a missing or blank label drops its row.
    for column, slot in ((spec.cluster, "groups"), (spec.cluster_second, "groups_second")):
        if column:
            coded = cached(("codes", column), lambda c=column: _category_codes(data[c]))
            setattr(found, slot, coded.codes)
            drops.drop(coded.codes < 0, column, "missing value")
    for column in spec.absorb:
        found.absorbed[column] = cached(("codes", column), lambda c=column: _category_codes(data[c]))
        drops.drop(found.absorbed[column].codes < 0, column, "missing value")
    resample = spec.bootstrap.cluster if spec.bootstrap is not None else None
    if resample:
        labels = data[resample]
        found.resample_groups = labels.astype(str).to_numpy()
        if resample != spec.cluster:
            drops.drop(labels.isna().to_numpy(), resample, "missing value")
    others = {spec.outcome_column, spec.weights, spec.time, *(r.column for r in spec.regressors)}
    labels_only = (spec.cluster, spec.cluster_second, resample, *spec.absorb)
    wanted = [c for c in spec.columns if not (c in labels_only and c not in others)]
    numeric = [c for c in wanted if c not in categories]
    # Each numeric column's conversion and range (a million-row pass or two) on the passes' threads.
    converted = engine.each_column(
        [functools.partial(cached, ("numbers", c), functools.partial(_numbers_and_finite, data[c], c)) for c in numeric],
        len(data),
    )
    prepared = dict(zip(numeric, converted, strict=True))
    for column in wanted:
        series = data[column]
        if column in categories:
            found.coded[column] = cached(("codes", column), lambda series=series: _category_codes(series))
            drops.drop(found.coded[column].codes < 0, column, "missing value")
            if found.coded[column].blank:
                drops.notes.append(
                    f"{found.coded[column].blank:,} row(s) of '{column}' have an empty level name (blank or only spaces); "
                    "they count as missing and were dropped. Give those cells a level name to keep them."
                )
            continue
        numbers = prepared[column]
        found.numbers[column] = numbers
        found.raw[column] = values = numbers.values
        if not numbers.all_finite:
            drops.drop(np.isnan(values), column, "missing value")
            drops.drop(np.isinf(values), column, "infinite value")
    if spec.time and spec.time not in found.raw:  # a time column also used as a category
        numbers = cached(("numbers", spec.time), lambda: _numbers_and_finite(data[spec.time], spec.time))
        found.raw[spec.time] = numbers.values
        if not numbers.all_finite:
            drops.drop(~numbers.finite & (found.coded[spec.time].codes >= 0), spec.time, "infinite value")
    return found


def _drop_outside_domains(spec: ModelSpec, found: _Columns, drops: _Drops, cached: Callable[..., Any]) -> None:
    """Drop the rows each transform cannot take, and rows whose weight is not above zero."""

    def drop_invalid(column: str, transform: Transform) -> None:
        numbers = found.numbers[column]
        if numbers.all_finite and not transform.invalid(np.array([numbers.low, numbers.high]))[0].any():
            return  # the range lies inside the transform's domain (an interval): no row to drop
        bad, reason = cached(("invalid", column, transform), lambda: transform.invalid(numbers.values))
        drops.drop(bad if numbers.all_finite else bad & numbers.finite, column, reason)

    drop_invalid(spec.outcome_column, spec.outcome_transform)
    for reg in spec.regressors:
        if reg.column not in found.coded:
            drop_invalid(reg.column, reg.transform)
    if spec.weights:
        weights = found.numbers[spec.weights]
        if not (weights.all_finite and weights.low > 0):
            positive = weights.values > 0
            drops.drop(
                ~positive if weights.all_finite else weights.finite & ~positive, spec.weights, "weights must be above zero"
            )


def _category_block(
    reg: RegressorSpec, coded: Coded, rows: np.ndarray | None, start: int
) -> tuple[Block, list[Term], Coded, np.ndarray, str]:
    """A category's block and dummy terms on the used rows (``rows`` None: every row), its codes
    there, its level names per row, and its mode for the reference point."""
    names = coded.names
    codes = coded.codes if rows is None else coded.codes[rows]
    tally = np.bincount(codes, minlength=len(names))
    present = sorted(names[np.flatnonzero(tally)].tolist(), key=_level_order)
    if len(present) < 2:
        raise DataError(
            f"category '{reg.column}' has a single level ('{present[0] if present else ''}') in the rows used; "
            "remove it from the regressors."
        )
    top = np.flatnonzero(tally == tally.max())
    # The mode for the reference point: ties go to the first name in sorted order (as pandas'
    # Series.mode); the default reference level: ties go to the level seen first in the rows
    # used (as pandas' value_counts).
    mode = str(min(names[top].tolist()))
    if reg.reference is not None:
        reference = reg.reference
    else:
        first = top[0] if len(top) == 1 else min(top, key=lambda c: int(np.argmax(codes == c)))
        reference = str(names[first])
    if reference not in present:
        if reference.strip() == "":
            raise DataError(unknown_level(f"category '{reg.column}' (its reference)", reference, reg.column, present))
        raise DataError(
            f"category '{reg.column}': the reference level '{reference}' does not occur in the rows used; "
            f"pick one of: {', '.join(present[:10])}."
        )
    levels = [lv for lv in present if lv != reference]
    block = Block(reg, start, start + len(levels), levels=levels, reference_level=reference)
    terms = [Term(f"{reg.column}[{level}]", reg.column, "category", level=level) for level in levels]
    per_row = coded.row_names if rows is None else names[codes]
    return block, terms, Coded(codes, names), per_row, mode


def _numeric_block(reg: RegressorSpec, x: np.ndarray, start: int, low: float, high: float) -> tuple[Block, list[Term]]:
    """A numeric regressor's block and terms (a quadratic has two); ``low`` and ``high`` the
    range of x."""
    if len(x) and high == low:
        raise DataError(
            f"regressor '{reg.column}' has the same value ({x[0]:g}) in every row used, so its effect "
            "cannot be estimated; remove it from the regressors."
        )
    block = Block(reg, start, start + reg.transform.width, binary=bool(len(x)) and _zero_one(x))
    terms = []
    for power in reg.transform.powers():
        name = reg.column if reg.transform.code == "level" else f"{reg.transform.code}({reg.column})"
        if power == 2:
            name = f"{reg.column}^2"
        elif power == 1:
            name = reg.column
        terms.append(Term(name, reg.column, reg.transform.code, power=power))
    return block, terms


@dataclass
class _Layout:
    """The design's blocks and terms, and what laying them out learnt of the used rows: the
    categories' codes and modes, the numeric regressors' ranges."""

    blocks: list[Block] = field(default_factory=list)
    terms: list[Term] = field(default_factory=lambda: [Term(name="intercept", column=None, transform=None)])
    width: int = 1
    codes: dict[str, Coded] = field(default_factory=dict)
    modes: dict[str, str] = field(default_factory=dict)
    ranges: dict[str, tuple[float, float]] = field(default_factory=dict)
    products: list[Product] = field(default_factory=list)


def _lay_out(spec: ModelSpec, found: _Columns, values: dict[str, np.ndarray], rows: np.ndarray | None) -> _Layout:
    """Blocks and terms for the used rows (``rows``; None for every row); adds each category's
    level names per row to ``values``."""
    layout = _Layout()
    for reg in spec.regressors:
        column = reg.column
        if isinstance(reg.transform, Category):
            block, new_terms, layout.codes[column], values[column], layout.modes[column] = _category_block(
                reg, found.coded[column], rows, layout.width
            )
        else:
            numbers = found.numbers[column]
            layout.ranges[column] = (numbers.low, numbers.high) if rows is None else _value_range(values[column])
            block, new_terms = _numeric_block(reg, values[column], layout.width, *layout.ranges[column])
        layout.blocks.append(block)
        layout.terms.extend(new_terms)
        layout.width = block.stop
    _cross(spec, layout)
    return layout


def _cross(spec: ModelSpec, layout: _Layout) -> None:
    """After the blocks, each crossed regressor's products with its moderator, named from the
    two terms ('log(price) × region[Inland]'); a category moderator's ``at`` levels checked."""
    by_column = {b.spec.column: b for b in layout.blocks}
    for reg in spec.regressors:
        if reg.by is None:
            continue
        left, right = by_column[reg.column], by_column[reg.by]
        if right.is_category and reg.by_at:
            known = [right.reference_level, *right.levels]
            for value in reg.by_at:
                if match_level(value, known) is None:
                    raise DataError(unknown_level(f"spec.regressors ({reg.column}).at", value, reg.by, known))
        width = (left.stop - left.start) * (right.stop - right.start)
        layout.products.append(Product(reg.column, reg.by, layout.width, layout.width + width))
        for a in layout.terms[left.start : left.stop]:
            for b in layout.terms[right.start : right.stop]:
                layout.terms.append(
                    Term(f"{a.name} × {b.name}", a.column, a.transform, a.level, a.power, by=b.column, by_level=b.level)
                )
        layout.width += width


def build_design(
    data: pd.DataFrame, spec: ModelSpec, columns: ColumnCache | None = None, within: np.ndarray | None = None
) -> Design:
    """Transform, drop and encode: the design matrix for ``spec`` on ``data``. ``columns``
    keeps converted and transformed columns between calls on the same table (see
    ``ColumnCache``); the design is the same with or without it. ``within`` (a boolean mask
    over the rows of ``data``) restricts the design to those rows, exactly as building it on
    ``data[within]`` would except that ``rows``, ``n_total`` and the dropped counts still refer
    to ``data``."""

    def cached(key: tuple[Any, ...], make: Callable[[], Any]) -> Any:
        return make() if columns is None else columns.get(data, key, make)

    n_total = len(data)
    if n_total == 0:
        raise DataError("the data has no rows; load a file with a header row and at least a few data rows.")
    drops = _Drops(n_total)
    found = _read_columns(data, spec, drops, cached)
    _drop_outside_domains(spec, found, drops, cached)
    if within is not None:
        drops.keep &= within
    if spec.absorb:
        _drop_singletons(spec, found, drops)
    raw = found.raw

    n = int(np.count_nonzero(drops.keep))
    every_row = n == n_total
    rows = _every_row(n_total) if every_row else np.flatnonzero(drops.keep)

    def used(array: np.ndarray) -> np.ndarray:
        """The used rows of a column; with no row dropped the column itself, read-only (it may
        be a view of the caller's frame: a design is valid while its table is unchanged, as
        the column cache's entries are, and nothing may write through it)."""
        if not every_row:
            return array[rows]
        if not array.flags.writeable:
            return array
        view = array.view()
        view.flags.writeable = False
        return view

    numeric = [reg.column for reg in spec.regressors if reg.column not in found.coded]
    outcome = spec.outcome_column
    values = {column: used(raw[column]) for column in numeric}
    layout = _lay_out(spec, found, values, None if every_row else rows)
    blocks, terms, width = layout.blocks, layout.terms, layout.width

    _check_rows(n, width, drops, spec)
    check_budget(blocks, n, width)
    encoder = Encoder(blocks, width, layout.products)
    bases = None if columns is None else _cached_bases(blocks, raw, cached, None if every_row else rows)
    y_transform = spec.outcome_transform
    y_raw = used(raw[outcome])
    if columns is not None:
        X = encoder.encode(values, n, layout.codes, bases)
        y = used(cached(("forward", outcome, y_transform), lambda: _forward_all_rows(y_transform, raw[outcome])))
    else:
        X, y = encoder.encode_beside(values, n, layout.codes, bases, functools.partial(_forward_all_rows, y_transform, y_raw))
    y_low, y_high = (found.numbers[outcome].low, found.numbers[outcome].high) if every_row else _value_range(y_raw)
    if y_high == y_low:
        raise DataError(
            f"the outcome '{spec.outcome_column}' has the same value ({y_raw[0]:g}) in every row used; "
            "there is nothing to explain. Pick another outcome."
        )
    weights = used(raw[spec.weights]) if spec.weights else None
    absorbed = _absorb(spec, found, X, y, weights, None if every_row else rows, terms, drops)
    return Design(
        y=y,
        y_raw=y_raw,
        X=X,
        terms=terms,
        encoder=encoder,
        values=values,
        weights=weights,
        groups=_compact(used(found.groups)) if found.groups is not None else None,
        groups_second=_compact(used(found.groups_second)) if found.groups_second is not None else None,
        absorbed=absorbed,
        time=periods(raw[spec.time], rows, spec.time) if spec.time else None,
        resample_groups=used(found.resample_groups) if found.resample_groups is not None else None,
        rows=rows,
        n_total=n_total,
        dropped=drops.dropped,
        warnings=drops.warnings(spec.weights),
        reference=reference_point(spec, blocks, values, layout.modes, _means_taken(found, numeric) if every_row else None),
        ranges=layout.ranges,
    )


def _check_rows(n: int, width: int, drops: _Drops, spec: ModelSpec) -> None:
    """More usable rows than coefficients, or a message saying what took them."""
    if n > width:
        return
    lonely = sum(d["count"] for d in drops.dropped if d["reason"] == SINGLETON)
    raise DataError(
        f"the model has {width} coefficients but only {n} usable row(s); it needs more rows than "
        "coefficients. Use fewer regressors or categories, or load more data."
        + (
            f" {lonely:,} row(s) were dropped as alone in their level of {' or '.join(spec.absorb)}: absorb fewer "
            "identifiers, or ones whose levels repeat."
            if lonely
            else ""
        )
    )


def _compact(codes: np.ndarray) -> np.ndarray:
    """Group codes renumbered 0..G-1 over the groups present (unchanged when all are)."""
    counts = np.bincount(codes)
    if counts.all():
        return codes
    mapping = np.cumsum(counts > 0) - 1
    return mapping[codes]


def _drop_singletons(spec: ModelSpec, found: _Columns, drops: _Drops) -> None:
    """Rows alone in a level of an absorbed identifier, dropped repeatedly (core.model.absorb)."""
    lonely = singleton_rows([found.absorbed[c].codes for c in spec.absorb], drops.keep)
    count = int(np.count_nonzero(lonely))
    if count:
        drops.drop(lonely, spec.absorb[0], SINGLETON)
        drops.notes.append(
            f"{count:,} row(s) dropped because they are alone in their level of {' or '.join(spec.absorb)} (singletons): "
            "their own fixed effect fits them exactly, so they tell nothing about the slopes."
        )


def _absorb(
    spec: ModelSpec,
    found: _Columns,
    X: np.ndarray,
    y: np.ndarray,
    weights: np.ndarray | None,
    rows: np.ndarray | None,
    terms: list[Term],
    drops: _Drops,
) -> Absorbed | None:
    """Sweep the absorbed identifiers' fixed effects out of X (in place) and y, on the used rows."""
    if not spec.absorb:
        return None
    coded = []
    for column in spec.absorb:
        codes = found.absorbed[column].codes
        coded.append((codes if rows is None else codes[rows], found.absorbed[column].names))
    record, warnings = absorb(X, y, spec.absorb, coded, weights, [t.name for t in terms])
    drops.notes.extend(warnings)
    n, k = X.shape
    if n <= k + record.dof:
        raise DataError(
            f"the model has {k} coefficients and {record.dof:,} absorbed fixed effects but only {n:,} usable rows; it needs "
            "more rows than both together. Absorb fewer identifiers or load more data."
        )
    return record


def _cached_bases(
    blocks: list[Block], raw: dict[str, np.ndarray], cached: Callable[..., Any], rows: np.ndarray | None
) -> dict[str, np.ndarray]:
    """Each numeric block's design columns on the used rows (``rows``; None for all), from the
    column cache's all-row basis."""
    bases = {}
    for block in blocks:
        reg = block.spec
        if not block.is_category:
            full = cached(("basis", reg.column, reg.transform), lambda r=reg: _basis_all_rows(r.transform, raw[r.column]))
            bases[reg.column] = full if rows is None else full[rows]
    return bases


def check_budget(blocks: list[Block], n: int, width: int) -> None:
    """Refuse, before any allocation, a design matrix over ``DESIGN_MAX_BYTES`` (n x width
    numbers), a model whose cross-product matrices would pass ``GRAM_MAX_BYTES`` (width²
    numbers) or one estimated to take longer than ``TIME_MAX_SECONDS``, naming the regressor
    that adds the most columns."""
    design_bytes, gram_bytes = 8.0 * n * width, 8.0 * width * width
    seconds = estimated_seconds(n, width)
    if design_bytes <= DESIGN_MAX_BYTES and gram_bytes <= GRAM_MAX_BYTES and seconds <= TIME_MAX_SECONDS:
        return
    widest = max(blocks, key=lambda b: b.stop - b.start)
    if design_bytes > DESIGN_MAX_BYTES:
        size = f"its design matrix ({n:,} rows x {width:,} columns) would take {design_bytes / 1e6:,.0f} MB, over the budget of {DESIGN_MAX_BYTES / 1e6:,.0f} MB"
    elif gram_bytes > GRAM_MAX_BYTES:
        size = f"its {width:,} columns are more than the {math.isqrt(int(GRAM_MAX_BYTES // 8)):,} Formwise fits"
    else:
        size = (
            f"{n:,} rows x {width:,} design columns would take about {seconds:,.0f} s to fit and check, over the "
            f"budget of {TIME_MAX_SECONDS:,.0f} s"
        )
    if widest.is_category and widest.stop - widest.start > width / 2:
        levels = widest.stop - widest.start + 1
        raise DataError(
            f"the model is too large: {size}; category '{widest.spec.column}' adds {levels - 1:,} of them "
            f"({levels:,} levels). Merge its rare levels into fewer groups, or leave it out of the regressors."
        )
    raise DataError(
        f"the model is too large: {size} ({len(blocks):,} regressors). Use fewer regressors or categories with fewer levels, "
        "or a sample of the rows."
    )


def estimated_seconds(n: int, width: int) -> float:
    """The time a fit of n rows and ``width`` design columns with its checks is estimated to take
    (see ``TIME_MAX_SECONDS``)."""
    return (float(n) * width * width + 12.0 * float(width) ** 3) / WORK_PER_SECOND


def periods(values: np.ndarray, rows: np.ndarray, column: str) -> np.ndarray:
    """Period numbers of the used rows for the time-series covariances: (t - t₀)/d with d the
    smallest step between distinct finite values of the whole time column (so a row dropped
    for a missing cell or a transform leaves a gap, not a shorter step), 0 for the first used
    period. Lags are then distances in periods (``core.model.covariance``)."""
    distinct = np.unique(values[np.isfinite(values)])
    if len(distinct) < 2:
        raise DataError(
            f"the time column '{column}' has fewer than two distinct periods; name a column that orders the rows in time."
        )
    step = float(np.min(np.diff(distinct)))
    position = (values[rows] - distinct[0]) / step
    number = np.round(position)
    if np.max(np.abs(position - number)) > 1e-6:
        raise DataError(
            f"the time column '{column}' is not evenly spaced: its values are not whole multiples of its smallest step "
            f"({step:g}). Use a period number (1, 2, 3, ...) that counts the periods."
        )
    number = number.astype(np.int64)
    number -= number.min()
    if number.max() > 100 * max(len(rows), 1_000):
        raise DataError(f"the time column '{column}' spans far more periods than there are rows; use a period number instead.")
    return number


def match_level(given: Any, levels: list[str]) -> str | None:
    """The category level ``given`` names: by its text, or by value for numeric-looking levels
    (so 2, 2.0 and "2" all name level "2")."""
    text = str(given)
    if text in levels:
        return text
    try:
        number = float(given)
    except (TypeError, ValueError):
        return None
    for level in levels:
        try:
            if float(level) == number:
                return level
        except ValueError:
            continue
    return None


def unknown_level(part: str, given: Any, column: str, levels: list[str], where: str = "") -> str:
    """The message for a value naming no level of ``column``: what was given (an empty name said
    in words), and the levels to choose from."""
    text = str(given)
    if text.strip() == "":
        said = "an empty level name" if text == "" else "a level name of only spaces"
        named = f"{said} is not a level of '{column}'{where} (cells without a level name count as missing)"
    else:
        named = f"'{text[:40]}' is not a level of '{column}'{where}"
    known = sorted(levels, key=_level_order)
    shown = ", ".join(f"'{level}'" for level in known[:20]) + (f" and {len(known) - 20} more" if len(known) > 20 else "")
    return f"{part}: {named}; levels are {shown}."


def _level_order(level: str) -> tuple[int, float, str]:
    """Numeric-looking levels in numeric order, then the rest alphabetically."""
    try:
        return (0, float(level), level)
    except ValueError:
        return (1, 0.0, level)


def reference_point(
    spec: ModelSpec,
    blocks: list[Block],
    values: dict[str, np.ndarray],
    modes: dict[str, str] | None = None,
    means: dict[str, float] | None = None,
) -> dict[str, Any]:
    """Where effects are evaluated: ``at`` values, else sample means (modes for categories; the
    first in sorted order on ties). ``modes`` and ``means`` may give the modes already counted and
    the means (numpy.mean of the same values) already taken."""
    means = means or {}
    jobs = [
        functools.partial(reference_value, spec, block, values[block.spec.column], modes, means.get(block.spec.column))
        for block in blocks
    ]
    # Threads only when some value is still to be read off its column (waking them costs more
    # than looking up means already taken).
    reads = any(block.is_category or block.spec.column not in means for block in blocks)
    rows = max((len(np.atleast_1d(v)) for v in values.values()), default=0) if reads else 0
    found = engine.each_column(jobs, rows)
    return {block.spec.column: value for block, value in zip(blocks, found, strict=True)}


def reference_value(
    spec: ModelSpec, block: Block, x: np.ndarray, modes: dict[str, str] | None = None, mean: float | None = None
) -> Any:
    """The reference point's value for one regressor (see ``reference_point``); x its values."""
    column = block.spec.column
    if column in spec.at:
        given = spec.at[column]
        if block.is_category:
            known = [block.reference_level, *block.levels]
            matched = match_level(given, known)
            if matched is None:
                raise DataError(unknown_level(f"spec.at.{column}", given, column, known))
            return matched
        if isinstance(given, str):
            raise DataError(f"spec.at.{column}: must be a number in the units of '{column}'.")
        bad, reason = block.spec.transform.invalid(np.array([float(given)]))
        if bad[0]:
            raise DataError(f"spec.at.{column}: {given:g} cannot be used because {reason}.")
        return float(given)
    if block.is_category:
        if modes and column in modes:
            return modes[column]
        labels, counts = np.unique(np.asarray(x).astype(str), return_counts=True)
        return str(labels[int(np.argmax(counts))])
    return mean if mean is not None else float(np.mean(x))


def rescaled_design(
    data: pd.DataFrame, design: Design, spec: ModelSpec, column: str, factor: float, work: np.ndarray | None = None
) -> Design | None:
    """``design`` with the numeric regressor ``column`` multiplied by ``factor``, for ``spec``
    (the model's spec with that regressor's change and ``at`` value rescaled): only that
    regressor's design columns, values and reference value are redone, the rest is shared.

    The result equals ``build_design`` on the rescaled data whenever the same rows are used; None
    when rescaling changes which rows the column allows (or the column also holds the weights,
    the clusters or the outcome), and the design must be built afresh. ``work``, a copy of
    ``design.X`` that may be overwritten, saves allocating one.
    """
    if column in (spec.weights, spec.cluster, spec.outcome_column) or design.encoder.crossed(column) or design.absorbed:
        return None
    block = design.encoder.block(column)
    regressor = next(r for r in spec.regressors if r.column == column)
    if block.is_category or isinstance(regressor.transform, Category):
        return None
    raw = _numeric(data[column], column)
    with np.errstate(all="ignore"):
        scaled = raw * factor

    def usable(x: np.ndarray) -> np.ndarray:
        bad, _ = regressor.transform.invalid(x)
        return np.isfinite(x) & ~bad

    if not np.array_equal(usable(raw), usable(scaled)):
        return None
    x = scaled if len(design.rows) == len(scaled) else scaled[design.rows]
    if float(np.ptp(x)) == 0:
        return None
    changed = Block(regressor, block.start, block.stop, binary=_zero_one(x))
    blocks = [changed if b is block else b for b in design.encoder.blocks]
    X = work if work is not None else design.X.copy(order="K")
    X[:, block.start : block.stop] = regressor.transform.basis(x)
    values = dict(design.values)
    values[column] = x
    reference = dict(design.reference)
    reference[column] = reference_value(spec, changed, x)
    ranges = dict(design.ranges)
    ranges[column] = _value_range(x)
    return replace(design, X=X, encoder=replace(design.encoder, blocks=blocks), values=values, reference=reference, ranges=ranges)

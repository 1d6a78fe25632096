"""Reading, checking and reducing row blocks for :mod:`lintools.blocks` (streams and Dask).

Every pass over the blocks checks each block (shape, values, labels, weights) and, from
the second pass on, that it is the block of the first pass: a *checksum* of each block is
taken on the first pass and compared on every later one (see :class:`BlockChecksums`).
A source that returns different data on a later pass (rows drawn afresh, shuffled, or
augmented with noise) would otherwise give a fit of no data set at all, marked converged.
"""

from __future__ import annotations

import inspect
import math
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

from ..support.errors import InputError
from ..support.threads import for_rows
from ..support.validate import as_matrix, as_vector, check_finite
from ..models.responses import read_labels
from .sample import merge_samples


# ---------------------------------------------------------------------------------------
# Reading and checking blocks
# ---------------------------------------------------------------------------------------


#: ``BlockSpec.labels`` of the first softmax pass: keep every label (not just three).
COLLECT_ALL = "collect all"


@dataclass(frozen=True)
class ClassIndex:
    """``BlockSpec.labels`` of the later softmax passes: code y as indices into ``classes``."""

    classes: tuple


@dataclass(frozen=True)
class BlockSpec:
    """What a block must look like: columns, response kind, whether weights come along.

    ``labels`` is ``None`` (a numeric response), ``"collect"`` (the first logistic pass:
    any two labels), the two classes ``(negative, positive)`` found by that pass,
    :data:`COLLECT_ALL` (the first softmax pass: every label) or a :class:`ClassIndex`
    (the later softmax passes: y coded as the index of its label, 0 .. K-1).
    """

    p: int | None
    labels: Any = None
    weights: bool | None = None


def _prefixed(index: int, exc: InputError) -> InputError:
    return InputError(f"block {index} (rows counted within the block): {exc}")


def _response_codes(index: int, yb: Any, m: int, classes: tuple) -> np.ndarray:
    """0/1 codes of ``yb`` for the known ``(negative, positive)`` classes; a label not seen
    before is an error (the check of :func:`_class_indices`, on the sorted pair)."""
    ordered = tuple(sorted(classes))
    return (_class_indices(index, yb, m, ordered) == ordered.index(classes[1])).astype(float)


def _class_indices(index: int, yb: Any, m: int, classes: tuple) -> np.ndarray:
    """Indices of ``yb``'s labels in the known ``classes``; a label not seen before is an error."""
    numeric = all(isinstance(c, (bool, int, float, np.number)) and abs(c) < 2.0**53 for c in classes)
    if numeric and type(yb) is np.ndarray and yb.ndim == 1 and yb.shape[0] == m and yb.dtype.kind in "biuf":
        known = np.asarray(classes, dtype=float)
        at = np.minimum(np.searchsorted(known, yb), len(classes) - 1)
        if bool(np.all(known[at] == yb)):  # the common case, without a dictionary
            return at.astype(np.intp)
    try:
        found, codes = read_labels(yb, m)
    except InputError as exc:
        raise _prefixed(index, exc) from None
    lookup = {c: k for k, c in enumerate(classes)}
    new = [c for c in found if c not in lookup]
    if new:
        row = int(np.argmax(codes == found.index(new[0])))
        shown = ", ".join(repr(c) for c in classes[:8]) + (", ..." if len(classes) > 8 else "")
        raise InputError(
            f"block {index}: y has the label {new[0]!r} at row {row} of the block, which the first "
            f"pass did not see (labels {shown}); source() must yield the same blocks on every pass"
        )
    return np.array([lookup[c] for c in found], dtype=np.intp)[codes]


def _label_summary(index: int, yb: Any, m: int, w: np.ndarray | None, keep: int | None = 3) -> dict:
    """Labels of a block: label -> [block, first row, total weight] (see :func:`_earliest`)."""
    try:
        found, codes = read_labels(yb, m)
    except InputError as exc:
        raise _prefixed(index, exc) from None
    first = [int(np.argmax(codes == k)) for k in range(len(found))]
    totals = np.bincount(codes, weights=w, minlength=len(found))
    seen = {found[k]: [index, first[k], float(totals[k])] for k in range(len(found))}
    return _earliest(seen, keep)


def _earliest(seen: dict, keep: int | None = 3) -> dict:
    """The ``keep`` labels seen first (by block, then row); all of them when ``keep`` is None.

    Three are enough for the binary fit to name a third label; softmax keeps every one."""
    if keep is None or len(seen) <= keep:
        return seen
    first = sorted(seen, key=lambda c: (seen[c][0], seen[c][1]))[:keep]
    return {c: seen[c] for c in first}


def _check_two(seen: dict) -> None:
    """Exactly two labels over all blocks may remain; else name the third one seen."""
    if len(seen) <= 2:
        return
    order = sorted(seen, key=lambda c: (seen[c][0], seen[c][1]))
    a, b, c = order[:3]
    block, row = seen[c][0], seen[c][1]
    raise InputError(
        f"block {block}: y has a third label {c!r} at row {row} of the block (after {a!r} and "
        f"{b!r}); a binary logistic model needs exactly two labels over all blocks: recode y, "
        "or fit a multiclass (softmax) model"
    )


def check_block(index: int, item: Any, spec: BlockSpec) -> tuple:
    """Validate one block; return ``(X, y, weights or None, column names or None, sums)``.

    ``y`` is a float array (numeric response), a label summary (``spec.labels ==
    "collect"`` or :data:`COLLECT_ALL`), 0/1 codes of the positive class, or class
    indices (a :class:`ClassIndex`).  Errors name the block, the row
    within the block, the column and the remedy.  ``sums`` are the sums of X of
    :func:`block_sums`: the finiteness check of the block and a part of its checksum.
    """
    if not isinstance(item, (tuple, list)) or len(item) not in (2, 3):
        what = f"a {type(item).__name__}" + (f" of length {len(item)}" if isinstance(item, (tuple, list)) else "")
        raise InputError(
            f"block {index}: the source yielded {what}; each block must be a tuple "
            "(X_block, y_block) or (X_block, y_block, weights_block)"
        )
    try:
        X, found = as_matrix(item[0], "X", check_finite=False)
        sums = block_sums(X)
        if not np.isfinite(sums[0]):
            check_finite(X, "X", found)  # names the first NaN or infinity
            sums = block_sums(X, _HUGE_SCALE)  # finite values whose sum overflows
    except InputError as exc:
        raise _prefixed(index, exc) from None
    m, q = X.shape
    if spec.p is not None and q != spec.p:
        raise InputError(
            f"block {index}: X has {q} columns but block 0 had {spec.p}; every block must have "
            "the same columns in the same order"
        )
    has_w = len(item) == 3 and item[2] is not None
    if spec.weights is not None and has_w != spec.weights:
        raise InputError(
            f"block {index}: " + ("weights are given, but block 0 had none" if has_w else
                                  "no weights are given, but block 0 had them")
            + "; give weights with every block or with none"
        )
    w = None
    if has_w:
        try:
            w = as_vector(item[2], "weights", m)
        except InputError as exc:
            raise _prefixed(index, exc) from None
        bad = w < 0
        if bad.any():
            i = int(np.argmax(bad))
            raise InputError(
                f"block {index}: weights has a negative value ({w[i]:g}) at row {i} of the block; "
                "weights must be >= 0"
            )
    if spec.labels is None:
        try:
            y = as_vector(item[1], "y", m)
        except InputError as exc:
            raise _prefixed(index, exc) from None
    elif isinstance(spec.labels, str) and spec.labels == "collect":
        y = _label_summary(index, item[1], m, w)
    elif isinstance(spec.labels, str) and spec.labels == COLLECT_ALL:
        y = _label_summary(index, item[1], m, w, keep=None)
    elif isinstance(spec.labels, ClassIndex):
        y = _class_indices(index, item[1], m, spec.labels.classes)
    else:
        y = _response_codes(index, item[1], m, spec.labels)
    return X, y, w, found, sums


# ---------------------------------------------------------------------------------------
# Checksums: the same block on every pass
# ---------------------------------------------------------------------------------------


CHANGED_REMEDY = (
    "the block source must return the same rows on every call, in the same order: read them "
    "from a file or a fixed array, and draw any random sample or noise once, before the fit"
)
#: Elements of the pieces in which a block's sums are formed (a piece stays in cache).
_PIECE = 1 << 15
#: The second sum of a checksum takes every ``_STRIDE``-th value: it sees values move.
_STRIDE = 7


#: Blocks whose values sum beyond the float64 range have their checksum sums formed on the
#: values times this power of two (exact for all but values below about 1e-154).
_HUGE_SCALE = 2.0**-512


def block_sums(X: np.ndarray, scale: float = 1.0) -> np.ndarray:
    """The sums of a block's X (times ``scale``): of all values and of every
    ``_STRIDE``-th value (row-major order).

    The values are taken in row-major order, in pieces of a fixed number of rows (a view
    of a row-major block, a copy of one piece otherwise), and each piece's sums are added
    to the running totals: the same numbers give the same bits whatever the memory layout
    of the block, so the checksums of two passes can be compared exactly.  The first sum
    is also the finiteness check of the block; the second moves when values move between
    positions (rows reordered, columns swapped).
    """
    m, p = X.shape
    rows = max(1, _PIECE // max(p, 1))
    sums = np.zeros(2)
    with np.errstate(over="ignore", invalid="ignore"):
        for lo in range(0, m, rows):
            flat = np.ravel(X[lo : lo + rows])
            if scale != 1.0:
                flat = flat * scale
            sums += (np.add.reduce(flat), np.add.reduce(flat[::_STRIDE]))
    return sums


def _vector_sums(v: np.ndarray) -> np.ndarray:
    """The sums of all values of ``v`` and of every ``_STRIDE``-th one (NumPy's pairwise
    summation, whose order depends only on the length)."""
    with np.errstate(over="ignore", invalid="ignore"):
        return np.array([np.add.reduce(v), np.add.reduce(v[::_STRIDE])])


@dataclass
class BlockPrint:
    """The checksum of one block on one pass (see :class:`BlockChecksums`)."""

    rows: int
    x_sums: np.ndarray
    x_ends: np.ndarray
    w_sums: np.ndarray | None = None
    y_sums: np.ndarray | None = None
    labels: dict | None = None  # first pass of a classifier: label -> (first row, total weight)
    code_sums: np.ndarray | None = None  # later passes: sums of the class codes
    code_rows: np.ndarray | None = None  # ... and each code's first row and total weight
    code_totals: np.ndarray | None = None


def block_print(X: np.ndarray, sums: np.ndarray, y: Any, w: np.ndarray | None, spec: BlockSpec) -> BlockPrint:
    """The checksum of a checked block (``sums`` and ``y`` as :func:`check_block` returns
    them for ``spec``)."""
    m = X.shape[0]
    ends = np.stack([X[0], X[-1]]) if m else np.zeros((2, X.shape[1]))
    pr = BlockPrint(m, sums, ends)
    if w is not None:
        pr.w_sums = _vector_sums(w)
    if isinstance(y, dict):  # the first pass of a classifier: the labels of the block
        pr.labels = {c: (v[1], v[2]) for c, v in y.items()}
    elif spec.labels is None:  # a numeric response
        pr.y_sums = _vector_sums(y)
    else:  # class codes: 0/1 for the binary fit, indices into the classes for softmax
        c = y.astype(np.int64)  # exact integer sums; the row-number-weighted one sees any move of a label
        pr.code_sums = np.array([c.sum(), np.arange(1, m + 1, dtype=np.int64) @ c], dtype=np.int64)
        top = int(c.max()) + 1 if m else 0
        pr.code_rows = np.full(top, -1, dtype=np.int64)
        pr.code_rows[c[::-1]] = np.arange(m - 1, -1, -1)  # the last write wins: each code's first row
        pr.code_totals = np.bincount(c, weights=w, minlength=top)
    return pr


@dataclass
class BlockChecksums:
    """Checksums of the blocks of the first pass, compared with every later pass.

    Per block: its rows; the sum of X (which is the finiteness check of the block as
    well) and the sum of every seventh value of X in row-major order, and its first and
    last rows; the same two sums of y and of the weights; for labels, each label's first
    row and total weight, and the plain and row-number-weighted sums of the class codes
    (exact integers).  Every sum is formed in a fixed
    order (:func:`block_sums`), so the same numbers give the same bits on every pass and
    the checksums are compared exactly: changed values, values or labels moved to other
    rows (unless only between rows seven apart) are refused, whatever the memory layout
    or float type the block comes in.  Cost per pass: one sum over X in cache-sized
    pieces (shared with the finiteness check) with a sum over a seventh of it, and sums
    over y and the weights (measured by ``benchmarks/block_checksum.py``).
    """

    prints: dict[int, BlockPrint] = field(default_factory=dict)

    def compare(self, index: int, passes: int, new: BlockPrint, spec: BlockSpec, names: Any) -> None:
        """Keep the print of pass 1; on a later pass raise an InputError naming the block
        and what changed when ``new`` is not the print of the same block."""
        old = self.prints.get(index)
        if old is None:
            self.prints[index] = new
            return
        where = f"block {index} on pass {passes} differs from the same block on pass 1"
        if not (np.array_equal(new.x_sums, old.x_sums) and np.array_equal(new.x_ends, old.x_ends)):
            raise InputError(f"{where}: X holds other values or rows in another order; {CHANGED_REMEDY}")
        if old.w_sums is not None and new.w_sums is not None and not np.array_equal(new.w_sums, old.w_sums):
            raise InputError(f"{where}: the weights hold other values or are in another order; {CHANGED_REMEDY}")
        if old.y_sums is not None and new.y_sums is not None and not np.array_equal(new.y_sums, old.y_sums):
            raise InputError(f"{where}: y holds other values or is in another order; {CHANGED_REMEDY}")
        if new.code_sums is None:
            return
        if old.code_sums is not None:
            if not np.array_equal(new.code_sums, old.code_sums):
                raise InputError(f"{where}: the labels of y are other ones or in another order; {CHANGED_REMEDY}")
            return
        if old.labels is not None:  # the first coded pass against the labels of pass 1
            classes = spec.labels.classes if isinstance(spec.labels, ClassIndex) else tuple(sorted(spec.labels))
            for label, (row, total) in old.labels.items():
                code = next((i for i, c in enumerate(classes) if c == label), len(new.code_rows))
                if code >= len(new.code_rows) or int(new.code_rows[code]) != row or new.code_totals[code] != total:
                    raise InputError(
                        f"{where}: the label {label!r} is on other rows or carries another total weight; "
                        f"{CHANGED_REMEDY}"
                    )
            old.code_sums = new.code_sums  # later passes compare the codes directly


def run_task(kernel: Callable, index: int, item: Any, spec: BlockSpec, args: tuple) -> tuple[dict, dict]:
    """Check a block and apply ``kernel(X, y, w, *args)`` to it (the map step of a pass);
    return the kernel's summary and ``{index: checksum of the block}``."""
    X, y, w, _, sums = check_block(index, item, spec)
    pr = block_print(X, sums, y, w, spec)
    out = kernel(X, y, w, *args)
    out["rows"] = X.shape[0]
    return out, {index: pr}


#: Rows per piece of a block mapped on the row threads: fixed, so that the pieces, and the
#: order in which their summaries are added, do not depend on the number of threads.
PIECE_ROWS = 1 << 16


def in_pieces(kernel: Callable, combine: Callable, X: np.ndarray, y: np.ndarray, w: np.ndarray | None,
              args: tuple, cargs: tuple) -> dict:
    """``kernel(X, y, w, *args)`` of one block as the ``combine`` of the kernel on consecutive
    pieces of :data:`PIECE_ROWS` rows, in order, the pieces mapped on the row threads
    (:func:`lintools.support.threads.for_rows`).  The elementwise work of a pass (the
    linear predictor, the loss, the weighted design) then runs on every core as it does
    in an in-memory fit, and one thread or several give the same bits."""
    n = X.shape[0]
    if n <= PIECE_ROWS:
        return kernel(X, y, w, *args)
    parts = for_rows(lambda lo, hi: kernel(X[lo:hi], y[lo:hi], None if w is None else w[lo:hi], *args),
                     n, PIECE_ROWS)
    out = parts[0]
    for part in parts[1:]:
        out = combine(out, part, *cargs)
    return out


def combine_task(combine: Callable, a: tuple, b: tuple, *cargs: Any) -> tuple[dict, dict]:
    """``combine`` of two summaries, and the union of their blocks' checksums."""
    return combine(a[0], b[0], *cargs), {**a[1], **b[1]}


def _tree(parts: Any, combine: Callable, cargs: tuple) -> Any:
    """Pairwise (binary-tree) reduction of an iterable, in order, keeping O(log n) partials."""
    stack: list[tuple[int, Any]] = []
    for part in parts:
        level = 0
        while stack and stack[-1][0] == level:
            part = combine(stack.pop()[1], part, *cargs)
            level += 1
        stack.append((level, part))
    if not stack:
        return None
    part = stack.pop()[1]
    while stack:
        part = combine(stack.pop()[1], part, *cargs)
    return part


class StreamRunner:
    """Runs passes over ``source()``: checks each block, maps it, reduces pairwise.

    The first pass fixes the number of columns, whether weights come along, and the rows
    of every block; later passes must see the same.
    """

    def __init__(self, source: Any, labels: Any = None) -> None:
        if not callable(source):
            raise InputError(
                f"source must be a function of no arguments that returns a fresh iterator of "
                f"(X_block, y_block[, weights_block]) on every call; got a {type(source).__name__} "
                "(wrap a list of blocks as lambda: iter(blocks))"
            )
        try:
            inspect.signature(source).bind()
        except TypeError:
            raise InputError(
                "source must be callable with no arguments (it is called once per pass and must "
                "return a fresh iterator of blocks each time); it needs arguments: bind them first, "
                "for example lambda: read_blocks(path)"
            ) from None
        except ValueError:  # no signature to inspect (some builtins): the call will tell
            pass
        self.source = source
        self.passes = 0
        self.rows: list[int] | None = None
        self.spec = BlockSpec(None, labels, None)
        self.names: tuple[str, ...] | None = None
        self._last_iterator: Any = None
        self.checksums = BlockChecksums()

    def _iterator(self) -> Any:
        it = self.source()
        if it is not None and it is self._last_iterator and iter(it) is it:
            raise InputError(
                "source() returned the same iterator as on the previous pass; it must return a "
                "fresh one on every call (make it a generator function, not a generator)"
            )
        try:
            iterator = iter(it)
        except TypeError:
            raise InputError(
                f"source() returned a {type(it).__name__}, which is not an iterator of blocks; "
                "make source a generator function (def source(): ... yield X_block, y_block)"
            ) from None
        self._last_iterator = it
        return iterator

    def reduce(self, kernel: Callable, combine: Callable, args: tuple = (), cargs: tuple = (),
               labels: Any = "same", pieces: bool = False) -> Any:
        """One pass: check and map every block, reduce pairwise; ``labels`` resets the response kind.

        With ``pieces`` the kernel maps each block in pieces of :data:`PIECE_ROWS` rows on the
        row threads (see :func:`in_pieces`); for kernels whose ``y`` is an array of rows and
        whose ``combine`` adds summaries of any rows.
        """
        if labels != "same":
            self.spec = BlockSpec(self.spec.p, labels, self.spec.weights)
        self.passes += 1
        first = self.rows is None
        rows: list[int] = []
        iterator = self._iterator()  # here, so that an exception of source() reaches the caller as it is

        def parts():
            for index, item in enumerate(iterator):
                X, y, w, found, sums = check_block(index, item, self.spec)
                if index == 0 and first:
                    self.spec = BlockSpec(X.shape[1], self.spec.labels, w is not None)
                    self.names = found
                if not first and (index >= len(self.rows) or X.shape[0] != self.rows[index]):
                    expected = f"{self.rows[index]} rows" if index < len(self.rows) else "no such block"
                    raise InputError(
                        f"block {index} on pass {self.passes} has {X.shape[0]} rows, but on pass 1 it had "
                        f"{expected}; source() must yield the same blocks on every pass"
                    )
                rows.append(X.shape[0])
                self.checksums.compare(index, self.passes, block_print(X, sums, y, w, self.spec),
                                       self.spec, self.names)
                out = in_pieces(kernel, combine, X, y, w, args, cargs) if pieces else kernel(X, y, w, *args)
                out["rows"] = X.shape[0]
                yield out

        result = _tree(parts(), combine, cargs)
        if result is None:
            raise InputError(
                f"source() yielded no blocks on pass {self.passes}"
                + (f" (pass 1 had {len(self.rows)}); it must return a fresh iterator on every call"
                   if not first else "; it must yield at least one (X_block, y_block) tuple")
            )
        if first:
            self.rows = rows
        elif len(rows) != len(self.rows):
            raise InputError(
                f"source() yielded {len(rows)} blocks on pass {self.passes} but {len(self.rows)} on "
                "pass 1; source() must yield the same blocks on every pass"
            )
        return result


# ---------------------------------------------------------------------------------------
# Kernels: R factors with exact pairwise centring
# ---------------------------------------------------------------------------------------


def _positive_rows(X: np.ndarray, y: np.ndarray | None, w: np.ndarray | None) -> tuple:
    if w is None or bool(np.all(w > 0)):
        return X, y, w
    keep = w > 0
    return X[keep], (None if y is None else y[keep]), w[keep]

def _merge_labels(a: dict, b: dict, keep: int | None = 3) -> dict:
    out = {k: list(v) for k, v in a.items()}
    for label, (block, row, total) in b.items():
        if label in out:
            old = out[label]
            first = min((old[0], old[1]), (block, row))
            out[label] = [first[0], first[1], old[2] + total]
        else:
            out[label] = [block, row, total]
    try:
        sorted(out)
    except TypeError:
        raise InputError(
            "y mixes label types across blocks that cannot be ordered (for example numbers in one "
            "block and text in another); use one type for every label"
        ) from None
    return _earliest(out, keep)

def _add(a: dict, b: dict) -> dict:
    """Sum of two partial results (maxima for ``top``, logical and for ``finite``, the
    sample of the union for ``sample``: :mod:`lintools.blocks.sample`)."""
    if "finite" in a and not (a["finite"] and b["finite"]):
        return {"finite": False, "change": math.inf}  # a linear predictor overflowed
    out = {}
    for key, value in a.items():
        if key == "top":
            out[key] = max(value, b[key])
        elif key == "sample":
            out[key] = merge_samples(value, b[key])
        elif key == "finite":
            out[key] = value and b[key]
        else:
            out[key] = value + b[key]
    return out

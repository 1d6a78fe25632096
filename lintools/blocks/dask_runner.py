"""Passes of the blocked fits on the Dask scheduler: a map over row chunks, a tree reduction.

:mod:`lintools.blocks` imports this module only when it is handed dask arrays, so dask
(the ``dask`` extra) is never needed otherwise.  Each pass of a fit becomes one task
graph: a task per row chunk checks the chunk and maps it to a small summary (an R
factor, or sums of a gradient and an information matrix), and summaries of adjacent
chunks are combined pairwise, level by level, into one (a binary tree of depth
``ceil(log2(chunks))``).  Only the summaries travel; the chunks stay where they are.
The graph runs on the scheduler in use, a ``distributed.Client`` when one is active.
Each chunk's task also returns the chunk's checksum, and the driver compares the
checksums of every later pass with those of the first (a chunk recomputed from a
non-deterministic graph, for example from ``dask.array.random`` without a seed, is refused).
"""

from __future__ import annotations

import math
from typing import Any, Callable

import dask

from ..support.errors import InputError
from .stream import BlockChecksums, BlockSpec, combine_task, run_task

__all__ = ["DaskRunner"]


def _shape_text(a: Any) -> str:
    return "(" + ", ".join(str(v) for v in a.shape) + ")"


class DaskRunner:
    """Runs the passes of a blocked fit over the row chunks of dask arrays ``X``, ``y``, ``weights``.

    The interface is that of the stream runner of :mod:`lintools.blocks`:
    ``reduce(kernel, combine, args, cargs, labels)`` returns the reduced summary of one
    pass; ``spec``, ``names`` and ``passes`` describe the data and count the passes.
    """

    def __init__(self, X: Any, y: Any, weights: Any, labels: Any) -> None:
        if X.ndim != 2:
            raise InputError(f"X is a dask array of shape {_shape_text(X)}; pass a 2-D array (rows, columns)")
        if y.ndim != 1:
            raise InputError(f"y is a dask array of shape {_shape_text(y)}; pass a 1-D array (one value per row)")
        arrays = [("X", X), ("y", y)] + ([("weights", weights)] if weights is not None else [])
        for name, a in arrays:
            if any(isinstance(v, float) and math.isnan(v) for v in a.shape):
                raise InputError(
                    f"{name} has unknown chunk sizes; call {name}.compute_chunk_sizes() (or persist "
                    "it) before fitting"
                )
        if X.shape[0] == 0 or X.shape[1] == 0:
            raise InputError(f"X has shape {_shape_text(X)}; pass at least one row and one column")
        for name, a in arrays[1:]:
            if a.ndim != 1:
                raise InputError(f"{name} is a dask array of shape {_shape_text(a)}; pass a 1-D array")
            if a.shape[0] != X.shape[0]:
                raise InputError(f"{name} has {a.shape[0]} entries but X has {X.shape[0]} rows; pass one value per row")
            if a.chunks[0] != X.chunks[0]:
                raise InputError(
                    f"{name} has row chunks {a.chunks[0][:5]}{'...' if len(a.chunks[0]) > 5 else ''} but X has "
                    f"{X.chunks[0][:5]}{'...' if len(X.chunks[0]) > 5 else ''}; give them the same row chunks: "
                    f"{name}.rechunk(X.chunks[0])"
                )
        if len(X.chunks[1]) > 1:
            X = X.rechunk({1: -1})  # a block is a set of whole rows
        self.p = int(X.shape[1])
        self.spec = BlockSpec(self.p, labels, weights is not None)
        self.names = None
        self.passes = 0
        xs = X.to_delayed().ravel()
        ys = y.to_delayed().ravel()
        ws = weights.to_delayed().ravel() if weights is not None else [None] * len(xs)
        self.items = [(a, b) if c is None else (a, b, c) for a, b, c in zip(xs, ys, ws)]
        self.checksums = BlockChecksums()

    def reduce(self, kernel: Callable, combine: Callable, args: tuple = (), cargs: tuple = (),
               labels: Any = "same", pieces: bool = False) -> Any:
        """One pass: map ``kernel`` over the chunks, combine the results pairwise, compute.

        ``pieces`` is accepted for the stream runner's sake and changes nothing here: dask's
        scheduler already maps the chunks on its own threads or workers.
        """
        if labels != "same":
            self.spec = BlockSpec(self.p, labels, self.spec.weights)
        self.passes += 1
        task = dask.delayed(run_task, pure=True)
        merge = dask.delayed(combine_task, pure=True)
        level = [task(kernel, i, item, self.spec, args) for i, item in enumerate(self.items)]
        while len(level) > 1:
            pairs = [merge(combine, level[i], level[i + 1], *cargs) for i in range(0, len(level) - 1, 2)]
            if len(level) % 2:
                pairs.append(level[-1])
            level = pairs
        result, prints = dask.compute(level[0])[0]
        for index in sorted(prints):  # the chunks of pass 1, and the same chunks on every later pass
            self.checksums.compare(index, self.passes, prints[index], self.spec, self.names)
        return result

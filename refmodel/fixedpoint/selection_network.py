"""The OS statistic by a pruned selection network shared along the stream.

The OS detector's statistic at a CUT is the ``k``-th smallest of its ``2R``
reference cells (``docs/bit-true.md`` section 3): the ``R`` lagging cells at
window offsets ``0 .. R-1`` and the ``R`` leading cells at ``R + 2G + 1 ..
2R + 2G``. This module computes it at every CUT of a block at once from
element-wise ``numpy.minimum`` and ``numpy.maximum`` on whole arrays, with no
sort or partition:

1. Each side is sorted by Batcher's odd-even merge sort [1]_ (for any length:
   a run of ``n`` cells is the merge of its first ``2**floor(log2(n-1))``
   cells and the rest; the general odd-even merge of Knuth [2]_), written as a
   network of compare-exchange steps.
2. The two sorted sides give the ``k``-th smallest of their union without a
   final merge:

       x_(k) = min over i of max(a_(i), b_(k-i)),   max(k-R, 0) <= i <= min(k, R)   (1)

   with ``a_(i)``, ``b_(j)`` the ``i``-th / ``j``-th smallest of the lagging /
   leading side and ``a_(0)``, ``b_(0)`` left out of the maximum. Proof: for
   each ``i`` at least ``k`` cells (``i`` from one side, ``k - i`` from the
   other) lie at or below ``max(a_(i), b_(k-i))``, so every term is ``>=
   x_(k)``; and for the ``i`` that counts the lagging cells among the ``k``
   smallest, both ``a_(i)`` and ``b_(k-i)`` are among them, so that term is
   ``<= x_(k)``. (Written out here; common practice, no source.)
3. Every step is a node of one graph in which a node is an operation on two
   *shifted* earlier nodes: the value "min of cells ``o`` and ``o + 1``" at
   CUT ``j`` is the node "min of cells 0 and 1" read at ``j + o``. The merge
   sort's blocks line up, so the leading side is the lagging side shifted by
   ``R + 2G + 1`` and most of a side's sorting network is the same few nodes
   at other shifts: each node is computed once per block, over the few extra
   positions its shifts need.
4. Only the nodes that (1) reaches are evaluated (the pruning: for rank ``k``
   only the side ranks ``max(k-R, 1) .. min(k, R)`` are needed), each array
   freed after its last use.

The result equals ``numpy.partition``'s ``k``-th smallest exactly (min and max
of integers are exact); ``tests/test_selection_network.py`` checks it against
``numpy.partition`` and by the 0-1 principle, and the pipeline equivalence
tests check the words.

References
----------
.. [1] K. E. Batcher, "Sorting networks and their applications," Proc. AFIPS
   Spring Joint Computer Conference, vol. 32, pp. 307-314, 1968 (odd-even
   merge sort).
.. [2] D. E. Knuth, *The Art of Computer Programming*, vol. 3, 2nd ed., 1998,
   sec. 5.3.4 (Batcher's merge for lists of any lengths, and the 0-1
   principle, Theorem Z).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

__all__ = ["SelectionKernel", "SelectionPlan", "selection_plan", "MAX_NODES"]

#: Plans with more evaluated nodes than this are not used (a partition is used instead; the plans of
#: R up to about 500 cells a side stay below it).
MAX_NODES = 6000

_MIN, _MAX = 0, 1
Ref = tuple[int, int]  # (node id, shift); node 0 is the cells themselves


class _Graph:
    """Nodes ``op(a shifted by sa, b shifted by sb)``, each stored once with its smaller shift 0."""

    def __init__(self):
        self.ops: list[tuple[int, Ref, Ref]] = [(-1, (0, 0), (0, 0))]  # node 0: the cells
        self._memo: dict[tuple[int, Ref, Ref], int] = {}

    def op(self, kind: int, x: Ref, y: Ref) -> Ref:
        if x == y:
            return x
        base = min(x[1], y[1])
        a, b = sorted(((x[0], x[1] - base), (y[0], y[1] - base)))
        key = (kind, a, b)
        nid = self._memo.get(key)
        if nid is None:
            nid = self._memo[key] = len(self.ops)
            self.ops.append(key)
        return nid, base

    def exchange(self, x: Ref, y: Ref) -> tuple[Ref, Ref]:
        return self.op(_MIN, x, y), self.op(_MAX, x, y)


def _shift(refs: list[Ref], by: int) -> list[Ref]:
    return [(n, s + by) for n, s in refs]


def _merge(g: _Graph, a: list[Ref], b: list[Ref]) -> list[Ref]:
    """Batcher's odd-even merge of two sorted lists of any lengths (Knuth 1998, sec. 5.3.4)."""
    if not a or not b:
        return a or b
    if len(a) == 1 and len(b) == 1:
        return list(g.exchange(a[0], b[0]))
    v, w = _merge(g, a[0::2], b[0::2]), _merge(g, a[1::2], b[1::2])
    out, i = [v[0]], 0
    while i < len(w) and i + 1 < len(v):
        out.extend(g.exchange(v[i + 1], w[i]))
        i += 1
    return out + v[i + 1 :] + w[i:]


def _sorted_run(g: _Graph, n: int, memo: dict) -> list[Ref]:
    """The ``n`` cells at offsets ``0 .. n-1``, ascending (odd-even merge sort)."""
    if n not in memo:
        if n == 1:
            memo[n] = [(0, 0)]
        else:
            h = 1 << ((n - 1).bit_length() - 1)
            memo[n] = _merge(g, _sorted_run(g, h, memo), _shift(_sorted_run(g, n - h, memo), h))
    return memo[n]


@dataclass(frozen=True)
class SelectionPlan:
    """The evaluated part of the graph for one ``(R, G, k)``.

    Attributes
    ----------
    steps : tuple
        ``(node, kind, (a, sa), (b, sb), lo, hi, free)`` in evaluation order:
        node ``node`` covers CUT positions ``lo .. m + hi - 1`` of a block of
        ``m`` CUTs; ``free`` lists the nodes whose last use this step is.
    root : Ref
        The ``k``-th smallest (node, shift).
    span : int
        Largest ``hi - lo`` of any evaluated node (sizes the buffers).
    cell_span : int
        Columns of cells beyond ``m`` that the block reads.
    buffers : int
        Work arrays a block needs at once (each ``m + span`` cells a row).
    """

    steps: tuple
    root: Ref
    span: int
    cell_span: int
    buffers: int

    @property
    def nodes(self) -> int:
        return len(self.steps)

    def kernel(self, rows: int, m: int, dtype) -> "SelectionKernel":
        """A :class:`SelectionKernel` for blocks of ``rows`` rows of ``m`` CUTs."""
        return SelectionKernel(self, rows, m, np.dtype(dtype))


class SelectionKernel:
    """A plan bound to one block shape: buffers allocated and every operand view made once.

    Parameters
    ----------
    plan : SelectionPlan
    rows, m : int
        Rows of the block and CUTs per row.
    dtype : numpy.dtype
        Unsigned integer type of the cells (narrower is faster).

    Notes
    -----
    Each node gets a buffer when it is computed and gives it back after its
    last use (a free list, resolved here once), so the block's work runs as
    one list of ``numpy.minimum`` / ``numpy.maximum`` calls on fixed views
    with no per-block Python bookkeeping. Write the cells into :attr:`cells`
    (column ``j``: the first lagging cell of CUT ``j``, window offset 0;
    ``m + span_cells`` columns), call :meth:`run`.
    """

    def __init__(self, plan: SelectionPlan, rows: int, m: int, dtype: np.dtype):
        self.cells = np.zeros((rows, m + plan.cell_span), dtype=dtype)
        width = m + plan.span
        buffers: list[np.ndarray] = []
        free: list[int] = []
        where: dict[int, tuple[int, int]] = {0: (-1, 0)}  # node -> (buffer index, lo)

        def view(ref: Ref, start: int, n: int) -> np.ndarray:
            b, lo = where[ref[0]]
            arr = self.cells if b < 0 else buffers[b]
            at = start + ref[1] - lo
            return arr[:, at : at + n]

        self._calls = []
        for node, kind, a, b, lo, hi, done in plan.steps:
            n = m + hi - lo
            if free:
                idx = free.pop()
            else:
                idx = len(buffers)
                buffers.append(np.empty((rows, width), dtype=dtype))
            out = buffers[idx][:, :n]
            self._calls.append((np.minimum if kind == _MIN else np.maximum, view(a, lo, n), view(b, lo, n), out))
            where[node] = (idx, lo)
            free.extend(where[f][0] for f in done)
        self.result = view(plan.root, 0, m)
        self.buffers = len(buffers)

    def run(self) -> np.ndarray:
        """The ``k``-th smallest at every CUT, ``(rows, m)``: a view of a buffer the next run overwrites."""
        for f, x, y, out in self._calls:
            f(x, y, out=out)
        return self.result


@lru_cache(maxsize=64)
def selection_plan(r: int, g: int, k: int, rank_on_lag_side_only: bool = False) -> SelectionPlan:
    """The plan for the ``k``-th smallest of the ``2R`` reference cells (or of the lagging ``R``).

    Parameters
    ----------
    r, g : int
        Reference and guard cells per side.
    k : int
        Rank, 1-based: ``1 .. 2R`` (both sides) or ``1 .. R`` (one side).
    rank_on_lag_side_only : bool
        The ``k``-th smallest of the lagging side alone (offsets ``0 .. R-1``).

    Returns
    -------
    SelectionPlan
    """
    g_ = _Graph()
    side = _sorted_run(g_, r, {})
    if rank_on_lag_side_only:
        root = side[k - 1]
    else:
        lead = _shift(side, r + 2 * g + 1)
        terms = []
        for i in range(max(0, k - r), min(k, r) + 1):
            parts = ([side[i - 1]] if i else []) + ([lead[k - i - 1]] if k - i else [])
            terms.append(parts[0] if len(parts) == 1 else g_.op(_MAX, *parts))
        while len(terms) > 1:  # a balanced tree of minima
            terms = [g_.op(_MIN, terms[j], terms[j + 1]) if j + 1 < len(terms) else terms[j]
                     for j in range(0, len(terms), 2)]
        root = terms[0]
    # Spans (lowest and highest shift each node is read at), from the root down; ids are topological.
    lo, hi = {root[0]: root[1]}, {root[0]: root[1]}
    uses: dict[int, int] = {}
    for node in range(len(g_.ops) - 1, 0, -1):
        if node not in lo:
            continue
        _, a, b = g_.ops[node]
        for child, s in (a, b):
            lo[child] = min(lo.get(child, lo[node] + s), lo[node] + s)
            hi[child] = max(hi.get(child, hi[node] + s), hi[node] + s)
            uses.setdefault(child, node)  # the first visit from the top is the last use
    order = sorted(n for n in lo if n)
    last_use: dict[int, list[int]] = {}
    for child, user in uses.items():
        if child:
            last_use.setdefault(user, []).append(child)
    steps = tuple((n, g_.ops[n][0], g_.ops[n][1], g_.ops[n][2], lo[n], hi[n], tuple(last_use.get(n, ())))
                  for n in order)
    span = max((hi[n] - lo[n] for n in order), default=0)
    live = peak = 0
    for step in steps:
        live += 1
        peak = max(peak, live)
        live -= len(step[-1])
    return SelectionPlan(steps, root, span, hi.get(0, root[1]), peak)

"""Fast bit-accurate model of the range-Doppler (map) pipeline: vectorised integer numpy, map by map.

:class:`MapPipeline` takes the stimulus stream in chunks of any size and
returns the output words of every map once its last cell has arrived;
:func:`run_map_fast` runs a whole stream. The words are those of
``docs/bit-true-2d.md``, bit for bit; the structural model
(:mod:`refmodel.fixedpoint.map_struct`) gives the same words one window-stream
step at a time.

How it is fast
--------------
A map is handled in strips of lines (slow-axis rows). Each strip is padded
as the window stream sees it (zeros, or wrapped cells under ``circular``),
and one summed-area table of the padded strip in unsigned 64-bit arithmetic
gives every rectangle sum of the window in four look-ups [1]_; the
arithmetic wraps modulo ``2**64`` and a signed combination of rectangle sums
is exact wherever the true value fits [2]_, which the running-sum width
``W_S`` guarantees. OS gathers the reference cells of each CUT from a strided
window view and selects the ``k``-th smallest with
:meth:`numpy.ndarray.partition`. The product, rounding and overflow are the
1D block's (:meth:`refmodel.block_spec.BlockSpec.threshold_from_statistic`
of the arithmetic twin).

References
----------
.. [1] F. C. Crow, "Summed-area tables for texture mapping", Computer
   Graphics (Proc. SIGGRAPH), vol. 18, no. 3, pp. 207-212, 1984.
.. [2] D. E. Knuth, *The Art of Computer Programming*, vol. 2, 3rd ed.,
   1997, sec. 4.3.2 (arithmetic modulo m).
"""

from __future__ import annotations

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from ..block_spec import BlockSpec
from ..errors import SpecError, require
from ..floatmodel.window2d import box_sums
from ..map_spec import MapSpec, is_map
from .pipeline_fast import FastPipeline
from .word_format import FIELDS, PipelineOutput

#: Padded cells per strip of work (the summed-area table of one strip is 8 bytes a cell).
STRIP_CELLS = 1 << 20
#: Gathered OS cells per block of CUTs (4 bytes each).
OS_GATHER_CELLS = 1 << 22


def padded_index(length: int, half: int, edge: str, start: int, stop: int) -> np.ndarray:
    """Map indices of padded positions ``start .. stop-1`` along one axis (-1: a zero cell).

    Padded position ``p`` holds map index ``i = p - half``; outside ``0 .. length-1`` it is
    ``i mod length`` under ``circular`` and a zero cell otherwise (``docs/bit-true-2d.md`` section 2).
    """
    i = np.arange(start, stop) - half
    inside = (i >= 0) & (i < length)
    if edge == "circular":
        return i % length
    return np.where(inside, i, -1)


def pad_strip(m: np.ndarray, spec: MapSpec, row0: int, rows: int) -> np.ndarray:
    """Padded lines ``row0 .. row0 + rows + 2H_s - 1`` of the map ``m`` (shape ``(L_s, L_f)``), all padded columns."""
    sf = spec.slow_fast
    _, _, hs, hf = spec.stream_window
    ri = padded_index(sf["slow"]["length"], hs, sf["slow"]["edge"], row0, row0 + rows + 2 * hs)
    ci = padded_index(sf["fast"]["length"], hf, sf["fast"]["edge"], 0, sf["fast"]["length"] + 2 * hf)
    p = np.zeros((ri.size, ci.size), dtype=m.dtype)
    rk, ck = ri >= 0, ci >= 0
    p[np.ix_(rk, ck)] = m[np.ix_(ri[rk], ci[ck])]
    return p


def map_statistic(spec: MapSpec, m: np.ndarray, row0: int, rows: int) -> np.ndarray:
    """The noise statistic S (``docs/bit-true-2d.md`` section 4) of the CUTs on lines ``row0 .. row0+rows-1``.

    Parameters
    ----------
    spec : MapSpec
    m : numpy.ndarray of int64, shape (L_s, L_f)
        One map in stream axes.
    row0, rows : int
        The strip of slow-axis lines.

    Returns
    -------
    numpy.ndarray of int64, shape (rows, L_f)
    """
    ws, wf, _, _ = spec.stream_window
    lf = m.shape[1]
    p = pad_strip(m, spec, row0, rows)
    if spec.kind == "os":
        ms, mf = np.nonzero(spec.stream_member())
        k = spec.rank
        out = np.empty((rows, lf), dtype=np.int64)
        view = sliding_window_view(p.astype(np.uint32), (ws, wf))  # (rows, L_f, W_s, W_f), a view
        block = max(1, OS_GATHER_CELLS // max(1, lf * ms.size))
        for a in range(0, rows, block):
            cells = view[a : a + block][:, :, ms, mf]  # a copy, partitioned in place
            cells.partition(k - 1, axis=-1)
            out[a : a + block] = cells[..., k - 1]
        return out
    table = np.zeros((p.shape[0] + 1, p.shape[1] + 1), dtype=np.uint64)
    np.cumsum(p.astype(np.uint64), axis=0, out=table[1:, 1:])
    np.cumsum(table[1:, 1:], axis=1, out=table[1:, 1:])
    sums = {part: box_sums(table, spec.stream_boxes(part), rows, lf) & np.uint64((1 << spec.part_bits(part)) - 1)
            for part in spec.parts}
    if spec.kind == "ca":
        s = sums["all"]
    elif spec.kind == "go":
        s = np.maximum(sums["lag"], sums["lead"])
    else:
        s = np.minimum(sums["lag"], sums["lead"])
    return s.view(np.int64)


def axis_fits(spec: MapSpec) -> tuple[np.ndarray, np.ndarray]:
    """Where the window fits along range and along Doppler, as ``(L_s, L_f)``-broadcastable masks."""
    sf = spec.slow_fast
    _, _, hs, hf = spec.stream_window
    ls, lf = sf["slow"]["length"], sf["fast"]["length"]
    i, j = np.arange(ls)[:, None], np.arange(lf)[None, :]
    slow = (i >= hs) & (i <= ls - 1 - hs)
    fast = (j >= hf) & (j <= lf - 1 - hf)
    return (fast, slow) if spec.order == "range-fast" else (slow, fast)


def map_words(spec: MapSpec, cells: np.ndarray) -> PipelineOutput:
    """Output words of one map given in stream order (``docs/bit-true-2d.md`` sections 4-8)."""
    sf = spec.slow_fast
    ls, lf = sf["slow"]["length"], sf["fast"]["length"]
    m = np.array(cells, dtype=np.int64).reshape(ls, lf)  # a copy: the caller may reuse its buffer
    stat = np.empty((ls, lf), dtype=np.int64)
    step = max(1, STRIP_CELLS // spec.padded_line - 2 * spec.stream_window[2])
    for a in range(0, ls, step):
        rows = min(step, ls - a)
        stat[a : a + rows] = map_statistic(spec, m, a, rows)
    thr = np.asarray(spec.threshold_from_statistic(stat), dtype=np.int64)
    c = m << spec.threshold_frac_bits if spec.threshold_frac_bits else m
    det = c > thr if spec.compare == ">" else c >= thr
    range_fits, doppler_fits = axis_fits(spec)
    valid = np.broadcast_to(range_fits & (doppler_fits | (spec.doppler_edge == "circular")), (ls, lf))
    zeroed = np.zeros((ls, lf), dtype=bool)
    if spec.range_edge == "skip":
        zeroed |= ~range_fits
    if spec.doppler_edge == "skip":
        zeroed |= ~doppler_fits
    thr[zeroed] = 0
    det[zeroed] = False
    last = np.zeros(ls * lf, dtype=bool)
    last[-1] = True
    return PipelineOutput(m.ravel(), thr.ravel(), det.ravel(), valid.ravel().copy(), last)


def check_samples(spec, samples, last) -> tuple[np.ndarray, np.ndarray]:
    """Validated ``(samples int64, last bool)`` of one chunk (``docs/bit-true-2d.md`` section 1)."""
    x, mark = np.asarray(samples), np.asarray(last)
    require(x.ndim == 1 and mark.shape == x.shape, "last", f"shapes {x.shape} and {mark.shape}",
            "one-dimensional samples and last markers of the same length")
    top = (1 << spec.input_bits) - 1
    allowed = f"integers 0..{top} (fixed.input_bits = {spec.input_bits})"
    require(x.dtype.kind in "iu", "samples", f"dtype {x.dtype}", allowed)
    x = x.astype(np.int64)
    if x.size and (int(x.min()) < 0 or int(x.max()) > top):
        raise SpecError("samples", f"values {x.min()}..{x.max()}", allowed)
    require(mark.dtype.kind in "biu", "last", f"dtype {mark.dtype}", "booleans (or integers 0 and 1)")
    if mark.dtype != bool:
        require(not np.any((mark != 0) & (mark != 1)), "last", f"values {mark.min()}..{mark.max()}",
                "booleans (or integers 0 and 1)")
    return x, mark.astype(bool)


class MapPipeline:
    """The map pipeline of one block, fed chunk by chunk.

    Parameters
    ----------
    spec : MapSpec

    Notes
    -----
    A frame of the stream is one map of exactly ``L_r * L_d`` cells in the
    spec's streaming order; its last cell carries the last marker and no
    other cell does. Between calls the object keeps at most one incomplete
    map (``L_r * L_d`` cells). The words do not depend on where the chunks
    are split.
    """

    def __init__(self, spec: MapSpec):
        self.spec = spec
        self._n = spec.map_cells
        self._buf = np.zeros(self._n, dtype=np.int64)
        self._fill = 0
        self._map = 0

    def push(self, samples, last) -> PipelineOutput:
        """Feed a chunk; return the words of every map completed by it, in order.

        Raises
        ------
        SpecError
            Samples out of range, or a last marker anywhere but on the last
            cell of a map (``frame length``). The object is left as it was.
        """
        x, mark = check_samples(self.spec, samples, last)
        n, fill = x.size, self._fill
        pos = (fill + np.arange(n)) % self._n
        want = pos == self._n - 1
        bad = np.flatnonzero(mark != want)
        if bad.size:
            i = int(bad[0])
            k = self._map + (fill + i) // self._n
            got = int(pos[i]) + 1
            problem = (f"map {k} ends after {got} cells" if mark[i] else f"map {k} has no last marker on its cell {got}")
            raise SpecError("frame length", problem,
                            f"maps of exactly map.range_cells x map.doppler_bins = {self._n} cells, the last marker "
                            "on each map's last cell only")
        parts = []
        i = 0
        if fill:
            take = min(n, self._n - fill)
            self._buf[fill : fill + take] = x[:take]
            fill += take
            i = take
            if fill == self._n:
                parts.append(map_words(self.spec, self._buf))
                self._map += 1
                fill = 0
        while n - i >= self._n:
            parts.append(map_words(self.spec, x[i : i + self._n]))
            self._map += 1
            i += self._n
        if i < n:
            self._buf[: n - i] = x[i:]
            fill = n - i
        self._fill = fill
        return PipelineOutput.concat(parts)

    def finish(self) -> PipelineOutput:
        """Return the words still held back: none when the stream ended on a map's last cell.

        Raises
        ------
        SpecError
            When the stream stopped inside a map.
        """
        require(self._fill == 0, "last", f"the stream stopped inside map {self._map} after {self._fill} cells",
                "a stream whose final cell carries the last marker")
        return PipelineOutput.concat([])


def run_map_fast(spec: MapSpec, samples, last) -> PipelineOutput:
    """Output words of a whole stimulus stream of maps (one word per cell, in order)."""
    pipe = MapPipeline(spec)
    out = pipe.push(samples, last)
    pipe.finish()
    return out


def pipeline_for(spec: BlockSpec | MapSpec):
    """The chunked fast model of a block: :class:`MapPipeline` for a map block, else
    :class:`refmodel.fixedpoint.pipeline_fast.FastPipeline`."""
    return MapPipeline(spec) if is_map(spec) else FastPipeline(spec)


__all__ = ["MapPipeline", "run_map_fast", "map_words", "map_statistic", "pipeline_for", "FIELDS"]

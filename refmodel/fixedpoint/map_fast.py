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
gives every rectangle sum of the window in four look-ups [1]_; for CA, GO
and SO the cells are multiplied by the constant ``A`` as they are padded
(sums, maxima and minima commute with ``A > 0``). The arithmetic is int64,
which wraps modulo ``2**64``, and a signed combination of rectangle sums is
exact wherever the true value fits [2]_, which the 62-bit product limit
guarantees. OS gathers the reference cells of each CUT from a strided
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

from ..errors import SpecError, require
from ..floatmodel.window2d import box_sums
from ..map_spec import MapSpec
from .fixed_arith import apply_overflow, round_shift, scale_product
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


def _pad_axis_into(dst: np.ndarray, src: np.ndarray, lo: int, length: int, half: int, edge: str, axis: int,
                   scale: int = 1) -> None:
    """Fill ``dst`` along ``axis`` with padded positions ``lo .. lo + dst.shape[axis] - 1`` of ``src``
    (whose index 0 is map index 0): map cells, wrapped cells under ``circular``, else zeros, by slices."""
    hi = lo + dst.shape[axis]
    # The three runs of padded positions: before the map, the map, after the map (p = i + half).
    for p0, p1, shift in ((lo, min(hi, half), length), (max(lo, half), min(hi, half + length), 0),
                          (max(lo, half + length), hi, -length)):
        if p0 >= p1:
            continue
        d = [slice(None)] * 2
        d[axis] = slice(p0 - lo, p1 - lo)
        if shift and edge != "circular":
            dst[tuple(d)] = 0
            continue
        sidx = [slice(None)] * 2
        sidx[axis] = slice(p0 - half + shift, p1 - half + shift)
        if scale == 1:
            dst[tuple(d)] = src[tuple(sidx)]
        else:
            np.multiply(src[tuple(sidx)], scale, out=dst[tuple(d)])


def pad_strip(m: np.ndarray, spec: MapSpec, row0: int, rows: int, out: np.ndarray, scale: int = 1) -> np.ndarray:
    """Padded lines ``row0 .. row0 + rows + 2H_s - 1`` of the map ``m`` (shape ``(L_s, L_f)``), all padded
    columns, times ``scale``, into ``out`` (shape ``(rows + 2H_s, L_f + 2H_f)``).

    Padded position ``p`` along an axis holds map index ``i = p - H``; outside ``0 .. L-1`` it is
    ``i mod L`` under ``circular`` and a zero cell otherwise (``docs/bit-true-2d.md`` section 2).
    """
    sf = spec.slow_fast
    _, _, hs, hf = spec.stream_window
    ls, lf = sf["slow"]["length"], sf["fast"]["length"]
    # Rows first (slices of m with all map columns), then the pad columns of every row.
    _pad_axis_into(out[:, hf : hf + lf], m, row0, ls, hs, sf["slow"]["edge"], 0, scale)
    if hf:
        if sf["fast"]["edge"] == "circular":
            out[:, :hf] = out[:, lf : lf + hf]
            out[:, hf + lf :] = out[:, hf : 2 * hf]
        else:
            out[:, :hf] = 0
            out[:, hf + lf :] = 0
    return out


def map_statistic(spec: MapSpec, m: np.ndarray, row0: int, rows: int, out: np.ndarray, scale: int = 1) -> None:
    """The noise statistic S (``docs/bit-true-2d.md`` section 4), times ``scale``, of the CUTs on lines
    ``row0 .. row0+rows-1``, into ``out``.

    Parameters
    ----------
    spec : MapSpec
    m : numpy.ndarray of int64, shape (L_s, L_f)
        One map in stream axes.
    row0, rows : int
        The strip of slow-axis lines.
    out : numpy.ndarray of int64, shape (rows, L_f)
    scale : int
        CA/GO/SO only: the cells are multiplied by ``scale`` as they are padded (sums, maxima and
        minima commute with a positive factor), so the constant's product comes for free.

    Notes
    -----
    The summed-area table is int64 arithmetic, which wraps modulo ``2**64``; every rectangle sum
    and part sum comes out exact because the true value fits (at most 62 bits: the block spec
    bounds the product ``S * A``) [2]_. So no modular reduction to ``W_S`` bits is needed here: the
    hardware's ``W_S``-bit registers hold the same true value.
    """
    ws, wf, hs, hf = spec.stream_window
    lf = m.shape[1]
    if spec.kind == "os":
        p = pad_strip(m, spec, row0, rows, np.empty((rows + 2 * hs, lf + 2 * hf), dtype=np.uint32))
        ms, mf = np.nonzero(spec.stream_member())
        k = spec.rank
        view = sliding_window_view(p, (ws, wf))  # (rows, L_f, W_s, W_f), a view
        block = max(1, OS_GATHER_CELLS // max(1, lf * ms.size))
        for a in range(0, rows, block):
            cells = view[a : a + block][:, :, ms, mf]  # a copy, partitioned in place
            cells.partition(k - 1, axis=-1)
            out[a : a + block] = cells[..., k - 1]
        return
    table = np.empty((rows + 2 * hs + 1, lf + 2 * hf + 1), dtype=np.int64)
    table[0], table[:, 0] = 0, 0
    inner = pad_strip(m, spec, row0, rows, table[1:, 1:], scale)
    np.cumsum(inner, axis=0, out=inner)
    np.cumsum(inner, axis=1, out=inner)
    if spec.kind == "ca":
        box_sums(table, spec.stream_boxes("all"), rows, lf, out)
    else:
        lag = box_sums(table, spec.stream_boxes("lag"), rows, lf)
        lead = box_sums(table, spec.stream_boxes("lead"), rows, lf)
        (np.maximum if spec.kind == "go" else np.minimum)(lag, lead, out=out)


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
    """Output words of one map given in stream order (``docs/bit-true-2d.md`` sections 4-8).

    ``cells`` (int64) becomes the ``cut`` field of the result; pass a copy if its buffer is reused.
    """
    sf = spec.slow_fast
    ls, lf = sf["slow"]["length"], sf["fast"]["length"]
    m = np.asarray(cells, dtype=np.int64).reshape(ls, lf)
    a, d = spec.alpha_int, spec.drop_bits
    premultiplied = spec.kind != "os" and not spec.truncate_partials
    stat = np.empty((ls, lf), dtype=np.int64)
    step = max(1, STRIP_CELLS // spec.padded_line - 2 * spec.stream_window[2])
    for r0 in range(0, ls, step):
        rows = min(step, ls - r0)
        map_statistic(spec, m, r0, rows, stat[r0 : r0 + rows], a if premultiplied else 1)
    # Product, rounding and overflow: the 1D steps (docs/bit-true.md sections 5-6); the overflow
    # step is left out where the largest threshold fits the threshold word.
    if premultiplied and d and spec.rounding != "half-even":  # round_shift's floor and half-up, in place
        thr = stat
        if spec.rounding == "half-up":
            thr += 1 << (d - 1)
        thr >>= d
    elif premultiplied:
        thr = round_shift(stat, d, spec.rounding)
    else:
        thr = scale_product(stat, a, d, spec.rounding, spec.truncate_partials)
    if spec.twin.threshold_max > (1 << spec.threshold_bits) - 1:
        thr = apply_overflow(thr, spec.threshold_bits, spec.overflow)
    c = m << spec.threshold_frac_bits if spec.threshold_frac_bits else m
    det = c > thr if spec.compare == ">" else c >= thr
    range_fits, doppler_fits = axis_fits(spec)
    valid = np.empty((ls, lf), dtype=bool)
    valid[...] = range_fits & (doppler_fits | (spec.doppler_edge == "circular"))
    for edge, fits in ((spec.range_edge, range_fits), (spec.doppler_edge, doppler_fits)):
        if edge == "skip":
            zeroed = np.broadcast_to(~fits, (ls, lf))
            thr[zeroed] = 0
            det[zeroed] = False
    last = np.zeros(ls * lf, dtype=bool)
    last[-1] = True
    return PipelineOutput(m.reshape(-1), thr.reshape(-1), det.reshape(-1), valid.reshape(-1), last)


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
        self._buf = np.zeros(self._n, dtype=np.uint32 if spec.input_bits <= 32 else np.int64)
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
                parts.append(map_words(self.spec, self._buf.astype(np.int64)))
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
        return parts[0] if len(parts) == 1 else PipelineOutput.concat(parts)

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


__all__ = ["MapPipeline", "run_map_fast", "map_words", "map_statistic", "FIELDS"]

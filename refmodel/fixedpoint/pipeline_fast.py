"""Fast bit-accurate model of the streaming CFAR pipeline: vectorised integer numpy, chunked.

:class:`FastPipeline` takes the stimulus in chunks of any size and returns
every output word as soon as it is determined; :func:`run_fast` runs a whole
stream in one call. The words are those of ``docs/bit-true.md`` sections 1-8,
bit for bit; the cycle-stepped structural model
(``refmodel/fixedpoint/pipeline_struct.py``) produces the same words one clock at a time.

How it is fast
--------------
Each frame is processed as the window sees it: the frame's samples with ``H``
edge cells on each end (zeros, or the wrapped samples under ``circular``),
exactly as the reference design's drain or replay feeds them. Frames of one
length lie side by side as the rows of a 2-D array, and the work runs in
blocks of about ``2**16`` cells, so that the intermediates stay in the
processor cache. For CA, GO and SO the cells are multiplied by the constant
``A`` as they are copied in (the maximum, minimum and sum of the sides commute
with the multiplication by ``A > 0``); the side sums of ``R`` cells then come
from a few additions of shifted copies (sums of 2, 4, 8, ... cells), or for
long sides from one cumulative sum per row and one difference [2]_. The
arithmetic is unsigned 64-bit, which wraps modulo ``2**64``; a difference of
two wrapped prefix sums is still exact whenever the true value fits [3]_, and
every product fits 62 bits (the block spec checks it). OS selects the
``k``-th smallest of the ``2R`` reference cells with a pruned selection
network of element-wise minima and maxima shared along the stream
(:mod:`refmodel.fixedpoint.selection_network`), on cells of the narrowest
unsigned type that holds the input; for very long sides (a network of more
than ``selection_network.MAX_NODES`` steps) it gathers the cells from a
strided window view and uses :meth:`numpy.ndarray.partition`.

References
----------
.. [1] cfarvec, ``docs/bit-true.md`` (this project's arithmetic contract):
   sections 2-3 (window, side sums, statistic S), 4 (constant A), 5 (product
   and rounding), 6 (overflow), 7 (decision), 8 (output word).
.. [2] G. E. Blelloch, "Prefix sums and their applications", Technical
   Report CMU-CS-90-190, Carnegie Mellon University, 1990 (a sum over any
   index range is the difference of two prefix sums).
.. [3] D. E. Knuth, *The Art of Computer Programming*, vol. 2, 3rd ed.,
   1997, sec. 4.3.2 (arithmetic modulo m: sums and differences of residues
   are residues of the sums and differences).
"""

from __future__ import annotations

import threading

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from ..block_spec import BlockSpec
from ..errors import SpecError, require
from .fixed_arith import round_shift, scale_product
from .selection_network import MAX_NODES, selection_plan
from .word_format import FIELDS, PipelineOutput

#: Cells per block of work: 2**16 int64 values (512 KiB) stay in a 1 MiB L2 cache.
BLOCK_CELLS = 1 << 16
#: Runs of equal-length frames in one chunk above which frames are grouped by length instead.
MAX_RUNS = 64
#: Longest frame kept whole under the ``circular`` policy (``stream.frame_length`` limit).
MAX_CIRCULAR_FRAME = 1 << 24
#: OS selection network: CUTs per block at most, and bytes of work arrays per block at most.
OS_BLOCK_CUTS = 1 << 16
OS_WORK_BYTES = 1 << 22
#: Bound OS kernels kept for reuse, per thread (each holds its block's work arrays; a result is copied out
#: before the next block, so the pipelines of one thread may share them).
MAX_KERNELS = 8
_LOCAL = threading.local()


class FastPipeline:
    """The streaming pipeline of one block, fed chunk by chunk.

    Parameters
    ----------
    spec : BlockSpec
        The block (detector, formats, edge policy).

    Notes
    -----
    A CUT's word depends on the samples up to ``H = R + G`` cells after it in
    its frame, or on the whole frame under ``circular`` [1]_. Between calls the
    object keeps only what later words need: the last ``2H`` samples of the
    frame still being received (``circular``: that whole frame, at most
    ``2**24`` samples), so memory stays bounded on a stream of any length.
    The words do not depend on where the chunks are split.

    References
    ----------
    .. [1] cfarvec, ``docs/bit-true.md``, sections 1-3 and 9.
    """

    def __init__(self, spec: BlockSpec):
        self.spec = spec
        self._h = spec.half_window
        self._circular = spec.edge == "circular"
        self._top_in = (1 << spec.input_bits) - 1
        # CA/GO/SO cells are scaled by A on entry unless each partial product is truncated.
        self._premultiplied = spec.kind != "os" and not spec.truncate_partials
        self._a, self._d = spec.alpha_int, spec.drop_bits  # alpha_int is recomputed on each access
        self._top = (1 << spec.threshold_bits) - 1
        self._overflow_possible = spec.threshold_max > self._top
        self._select = _OsSelection(spec) if spec.kind == "os" else None
        self._block = max(self._select.block if self._select else BLOCK_CELLS, 4 * self._h, 64)
        # Work space reused from block to block: the window cells and their partial sums.
        self._cells_buf, self._work = [np.zeros(0, np.uint64)], [np.zeros(0, np.uint64)]
        self._tail = np.zeros(0, dtype=np.int64)  # frame indices [seen - len(tail), seen) of the open frame
        self._pieces: list[np.ndarray] = []  # circular: the open frame so far
        self._seen = 0  # samples of the open frame received so far
        self._frame = 0  # index of the open frame in the stream

    # ---- public ---------------------------------------------------------
    def push(self, samples, last) -> PipelineOutput:
        """Feed a chunk and return the output words it determines, in order.

        Parameters
        ----------
        samples : array_like of int, shape (n,)
            Input samples, ``0 .. 2**input_bits - 1``.
        last : array_like of bool, shape (n,)
            Last markers (1 on the final sample of each frame).

        Returns
        -------
        PipelineOutput
            The words of every CUT that has become determined: those of
            earlier chunks still waiting for samples, then this chunk's, up to
            the last one whose ``H`` following samples have arrived (all of a
            frame once its last marker is in). There may be fewer or more
            words than samples.

        Raises
        ------
        SpecError
            ``samples`` out of range or not integers, ``last`` of another
            shape or not boolean, a frame shorter than the window
            ``W = 2R + 2G + 1`` (``frame length``), or under ``circular`` a
            frame longer than ``2**24`` samples. The object is left as it was.
        """
        x, mark = self._check(samples, last)
        n = x.size
        h, seen, circ = self._h, self._seen, self._circular
        ends = np.flatnonzero(mark)
        first = int(ends[0]) + 1 if ends.size else n  # samples of this chunk in the open frame
        lengths = np.diff(ends)
        self._check_lengths(seen + first if ends.size else None, lengths, seen + n)

        next_cut = 0 if circ else max(0, seen - h)  # first CUT of the open frame without a word yet
        if ends.size:
            head_stop = seen + first
        else:
            head_stop = next_cut if circ else max(next_cut, seen + n - h)
        tail_len = n - (int(ends[-1]) + 1 if ends.size else 0)  # samples of the frame left open
        tail_words = 0 if circ or not ends.size else max(0, tail_len - h)
        pend = seen - next_cut
        total = head_stop - next_cut + (int(ends[-1] - ends[0]) if ends.size else 0) + tail_words
        out = _empty(total)
        fields = [getattr(out, f) for f in FIELDS]

        # 1. The open frame carried over from earlier chunks, continued (and maybe ended) here.
        frame_len = seen + first if ends.size else None
        if circ:
            if ends.size:
                whole = np.concatenate(self._pieces + [x[:first]]) if self._pieces else x[:first]
                self._group(whole[None, :], 0, 0, frame_len, frame_len, fields, 0)
        elif seen == 0:
            self._group(x[None, :first], 0, 0, head_stop, frame_len, fields, 0)
        else:
            # CUTs whose window reaches back into the carried samples, then the rest from the chunk.
            mid = min(head_stop, seen + h)
            carried = np.concatenate([self._tail, x[: min(first, 2 * h)]])
            self._group(carried[None, :], seen - self._tail.size, next_cut, mid, frame_len, fields, 0)
            self._group(x[None, :first], seen, mid, head_stop, frame_len, fields, mid - next_cut)

        # 2. Whole frames inside the chunk. A run of frames of one length is one 2-D array (a view);
        #    when lengths vary a lot, the frames of each length are gathered into one and scattered back.
        if lengths.size:
            starts = ends[:-1] + 1
            breaks = np.r_[0, np.flatnonzero(np.diff(lengths)) + 1, lengths.size]
            if breaks.size <= MAX_RUNS:
                for a, b in zip(breaks[:-1], breaks[1:]):
                    s, length = int(starts[a]), int(lengths[a])
                    rows = x[s : s + (b - a) * length].reshape(b - a, length)
                    self._group(rows, 0, 0, length, length, fields, pend + s)
            else:
                for length in np.unique(lengths).tolist():
                    at = starts[lengths == length][:, None] + np.arange(length)
                    part = _empty(at.size)
                    self._group(x[at], 0, 0, length, length, [getattr(part, f) for f in FIELDS], 0)
                    for f in FIELDS:
                        getattr(out, f)[pend + at.ravel()] = getattr(part, f)

        # 3. The frame left open at the end of the chunk, and the state for the next call.
        if ends.size:
            s = int(ends[-1]) + 1
            self._frame += ends.size
            if circ:
                self._pieces = [x[s:].astype(np.int64)] if tail_len else []
            else:
                self._group(x[None, s:], 0, 0, tail_words, None, fields, pend + s)
                self._tail = x[max(s, n - 2 * h) :].astype(np.int64)
            self._seen = tail_len
        else:
            if circ:
                self._pieces = self._pieces + [x.astype(np.int64)]
            elif n >= 2 * h:
                self._tail = x[n - 2 * h :].astype(np.int64)
            else:
                self._tail = np.concatenate([self._tail, x])[-2 * h :]
            self._seen = seen + n
        return out

    def finish(self) -> PipelineOutput:
        """Return the words still held back: none when the stream ended on a last marker.

        Raises
        ------
        SpecError
            When the stream stopped inside a frame (its final sample carried
            no last marker, ``docs/bit-true.md`` section 1).
        """
        require(self._seen == 0, "last",
                f"the stream stopped inside frame {self._frame} after {self._seen} samples without a last marker",
                "a stream whose final sample carries the last marker")
        return _empty(0)

    # ---- validation -----------------------------------------------------
    def _check(self, samples, last) -> tuple[np.ndarray, np.ndarray]:
        x = np.asarray(samples)
        mark = np.asarray(last)
        require(x.ndim == 1 and mark.shape == x.shape, "last", f"shapes {x.shape} and {mark.shape}",
                "one-dimensional samples and last markers of the same length")
        top = self._top_in
        allowed = f"integers 0..{top} (fixed.input_bits = {self.spec.input_bits})"
        require(x.dtype.kind in "iu", "samples", f"dtype {x.dtype}", allowed)
        narrow = x.dtype.kind == "u" and x.dtype.itemsize * 8 <= self.spec.input_bits
        if x.size and not narrow and int(np.bitwise_or.reduce(x)) >> self.spec.input_bits:
            raise SpecError("samples", f"values {x.min()}..{x.max()}", allowed)
        if x.dtype == np.uint64:  # mixing uint64 with int64 would go through float64
            x = x.astype(np.int64)
        if mark.dtype != bool:
            require(mark.dtype.kind in "iu", "last", f"dtype {mark.dtype}", "booleans (or integers 0 and 1)")
            require(not np.any((mark != 0) & (mark != 1)), "last", f"values {mark.min()}..{mark.max()}",
                    "booleans (or integers 0 and 1)")
            mark = mark != 0
        return x, mark

    def _check_lengths(self, first_len, lengths, open_len) -> None:
        """Every frame ended here is at least W long; circular frames at most 2**24."""
        w = self.spec.window_length
        all_len = np.r_[[] if first_len is None else [first_len], lengths].astype(np.int64)
        short = np.flatnonzero(all_len < w)
        if short.size:
            i = int(short[0])
            raise SpecError("frame length", f"frame {self._frame + i} has {int(all_len[i])} samples",
                            f"frames of at least the window length W = 2R+2G+1 = {w}")
        if self._circular:
            if first_len is None:
                all_len = np.r_[all_len, open_len]
            long = np.flatnonzero(all_len > MAX_CIRCULAR_FRAME)
            if long.size:
                raise SpecError("frame length", f"frame {self._frame + int(long[0])} exceeds {MAX_CIRCULAR_FRAME} samples",
                                f"frames of at most {MAX_CIRCULAR_FRAME} samples under edge = \"circular\" "
                                "(the whole frame is stored)")

    # ---- computation ----------------------------------------------------
    def _group(self, src, f0, n0, n1, length, out, o) -> None:
        """Words of CUTs ``n0 .. n1-1`` of each row of ``src`` into the field arrays ``out`` from ``o`` on, row after row.

        ``src[:, j]`` holds frame index ``f0 + j`` and covers the cells the
        CUTs' windows need inside the frame; ``length`` is the frame length
        (None: the frame goes on beyond ``src``).
        """
        rows, m = src.shape[0], n1 - n0
        if m <= 0:
            return
        if m <= self._block:
            step = max(1, self._block // m)
            for r in range(0, rows, step):
                k = min(step, rows - r)
                dst = [f[o + r * m : o + (r + k) * m].reshape(k, m) for f in out]
                self._words(src[r : r + k], f0, n0, m, length, dst)
            return
        for r in range(rows):
            for c in range(n0, n1, self._block):
                mm = min(self._block, n1 - c)
                p = o + r * m + c - n0
                self._words(src[r : r + 1], f0, c, mm, length, [f[p : p + mm].reshape(1, mm) for f in out])

    def _words(self, src, f0, n0, m, length, dst) -> None:
        """Fill the output fields ``dst`` (each shaped (rows, m)) for CUTs ``n0 .. n0+m-1``."""
        spec = self.spec
        cut, thr, det, valid, last = dst
        np.copyto(cut, src[:, n0 - f0 : n0 - f0 + m])
        dest = self._select.destination(src.shape[0], m) if self._select else None
        z = self._cells(src, f0, n0, m, length, self._a if self._premultiplied else 1, dest)
        s = thr.view(np.uint64)
        lag_edge, lead_edge = _edges(n0, m, length, self._h)
        _statistic_into(spec, z, m, lag_edge, lead_edge, s, self._work, self._select)
        # Product, rounding (section 5) and overflow (section 6), in place.
        d = self._d
        if spec.truncate_partials:
            s[...] = scale_product(s, self._a, d, "floor", True)
        else:
            if not self._premultiplied:
                s *= np.uint64(self._a)
            if d and spec.rounding == "half-even":
                s[...] = round_shift(s, d, "half-even")
            elif d:
                if spec.rounding == "half-up":
                    s += np.uint64(1 << (d - 1))
                s >>= np.uint64(d)
        if self._overflow_possible:
            if spec.overflow == "saturate":
                np.minimum(s, np.uint64(self._top), out=s)
            else:
                s &= np.uint64(self._top)
        # Decision (section 7); skip zeroes T and det where the window does not fit.
        f_t = spec.threshold_frac_bits
        c = cut << f_t if f_t else cut
        (np.greater if spec.compare == ">" else np.greater_equal)(c, thr, out=det)
        valid.fill(True)
        for side in (lag_edge, lead_edge):
            valid[:, side] = False
            if spec.edge == "skip":
                thr[:, side] = 0
                det[:, side] = False
        last.fill(False)
        if length is not None and n0 + m == length:
            last[:, -1] = True

    def _cells(self, src, f0, n0, m, length, scale, z=None) -> np.ndarray:
        """The cells the windows of CUTs ``n0 .. n0+m-1`` see, times ``scale``.

        Returns an unsigned array of shape (rows, m + 2H + 1): column 0 is 0
        (so that a cumulative sum starts from 0) and column ``1 + j`` holds frame
        index ``n0 - H + j``, 0 outside the frame or the wrapped sample under
        ``circular`` (``docs/bit-true.md`` section 2). It is ``z`` when given
        (any unsigned type that holds the cells; ``scale`` must then be 1),
        else a reused uint64 buffer.
        """
        h = self._h
        rows = src.shape[0]
        if z is None:
            z = _take(self._cells_buf, (rows, m + 2 * h + 1))
            zi = z.view(np.int64)

            def put(dst, part):
                np.multiply(part, np.int64(scale), out=dst)
        else:
            zi = z

            def put(dst, part):
                np.copyto(dst, part, casting="unsafe")
        first = n0 - h  # frame index of column 1
        lo = max(first, 0)
        hi = n0 + m + h if length is None else min(n0 + m + h, length)
        zi[:, : 1 + lo - first] = 0
        zi[:, 1 + hi - first :] = 0
        put(zi[:, 1 + lo - first : 1 + hi - first], src[:, lo - f0 : hi - f0])
        if self._circular:  # src holds the whole frame (f0 = 0): the cells beyond its ends wrap
            if first < 0:
                put(zi[:, 1 : 1 - first], src[:, length + first :])
            if hi < n0 + m + h:
                put(zi[:, 1 + hi - first :], src[:, : n0 + m + h - length])
        return z


def _edges(n0: int, m: int, length: int | None, h: int) -> tuple[slice, slice]:
    """Columns (of CUTs ``n0 .. n0+m-1``) whose lagging, resp. leading, side runs past the frame."""
    lag = slice(0, min(m, max(0, h - n0)))
    lead = slice(m, m) if length is None else slice(min(m, max(0, length - h - n0)), m)
    return lag, lead


def _take(buf: list, shape: tuple[int, int]) -> np.ndarray:
    """An uninitialised uint64 array of ``shape`` in the reusable buffer ``buf[0]`` (grown when too small)."""
    n = shape[0] * shape[1]
    if buf[0].size < n:
        buf[0] = np.empty(n, dtype=np.uint64)
    return buf[0][:n].reshape(shape)


class _OsSelection:
    """The OS statistic's ``k``-th smallest of the ``2R`` reference cells, block by block.

    A selection network (:mod:`refmodel.fixedpoint.selection_network`) run
    over the rows of a block laid end to end (``m + 2H + 1`` cells a row, so
    one long run of ``numpy.minimum`` / ``numpy.maximum`` calls covers every
    row; the few positions that straddle two rows are computed and dropped),
    with one bound kernel per block shape (a few kept); or, when the network
    would exceed ``MAX_NODES`` steps, a partition of the gathered cells.
    """

    def __init__(self, spec: BlockSpec):
        r, g, k = spec.ref_per_side, spec.guard_per_side, spec.rank
        self.r, self.lead_at, self.k, self.h = r, r + 2 * g + 1, k, r + g
        self.dtype = next(np.dtype(t) for t in (np.uint8, np.uint16, np.uint32) if np.dtype(t).itemsize * 8
                          >= spec.input_bits)
        plan = selection_plan(r, g, k)
        self.plan = plan if plan.nodes <= MAX_NODES else None
        if self.plan is None:
            self.block = max(BLOCK_CELLS // (2 * r), 1)
        else:
            per_cut = max(1, plan.buffers) * self.dtype.itemsize
            self.block = max(min(OS_BLOCK_CUTS, OS_WORK_BYTES // per_cut - plan.span), 64)
        self._key = (r, g, k, self.dtype.str)
        self._kern = None

    def destination(self, rows: int, m: int) -> np.ndarray | None:
        """Where :meth:`FastPipeline._cells` should put the cells: ``(rows, m + 2H + 1)`` in the narrow type."""
        width = m + 2 * self.h + 1
        if self.plan is None:
            return np.empty((rows, width), dtype=self.dtype)
        kept = _LOCAL.__dict__.setdefault("kernels", {})
        key = self._key + (rows, m)
        kern = kept.pop(key, None)
        if kern is None:
            # Positions p = 1 + row * width + j: CUT j of each row (column 0 of a row is the padding).
            kern = self.plan.kernel(1, rows * width + 1, self.dtype)
        if rows * width <= 4 * OS_BLOCK_CUTS:  # keep only block-sized kernels (statistic() may ask for a frame)
            kept[key] = kern  # most recently used last
            while len(kept) > MAX_KERNELS:
                kept.pop(next(iter(kept)))
        self._kern = kern
        return kern.cells[0, : rows * width].reshape(rows, width)

    def kth(self, z: np.ndarray) -> np.ndarray:
        """The ``k``-th smallest reference cell at each CUT, ``(rows, m)``, from the cells ``z``."""
        m = z.shape[1] - 2 * self.h - 1
        if self.plan is not None:
            out = self._kern.run()
            return out[0, 1 : 1 + z.size].reshape(z.shape)[:, :m]
        win = sliding_window_view(z[:, 1:], 2 * self.h + 1, axis=1)[:, :m]
        r, at = self.r, self.lead_at
        picked = win[:, :, np.r_[0:r, at : at + r]]  # a copy, partitioned in place
        picked.partition(self.k - 1, axis=-1)
        return picked[..., self.k - 1]


def _statistic_into(spec: BlockSpec, z: np.ndarray, m: int, lag_edge: slice, lead_edge: slice, s: np.ndarray,
                    work: list, select: _OsSelection | None) -> None:
    """The statistic S of ``docs/bit-true.md`` section 3 into ``s`` (rows, m), from the cells ``z``.

    ``z`` is consumed (reused as work space). Scaling of ``z`` carries over
    to ``s``: max, min, sum and order statistics commute with a positive factor.
    ``select`` computes the OS order statistic (None for the other kinds).
    """
    r, g = spec.ref_per_side, spec.guard_per_side
    h = r + g
    lead_at = h + g + 1  # column offset of the leading side's first cell from the lagging side's
    one_sided = spec.edge == "one-sided"
    if spec.kind == "os":
        s[...] = select.kth(z)
        if one_sided:
            win = sliding_window_view(z[:, 1:], 2 * h + 1, axis=1)[:, :m]  # (rows, m, W), a view
            kh = spec.os_side_rank
            for side, cols in ((lag_edge, slice(lead_at, lead_at + r)), (lead_edge, slice(0, r))):
                if side.start < side.stop:
                    s[:, side] = np.partition(win[:, side, cols], kh - 1, axis=-1)[..., kh - 1]
        return
    box = _box_sums(z, r, work)  # box[:, j] = sum of the cells in columns j+1 .. j+R
    lag, lead = box[:, :m], box[:, lead_at : lead_at + m]
    {"ca": np.add, "go": np.maximum, "so": np.minimum}[spec.kind](lag, lead, out=s)
    if one_sided:
        factor = np.uint64(2 if spec.kind == "ca" else 1)  # CA one-sided doubles the side sum
        np.multiply(lead[:, lag_edge], factor, out=s[:, lag_edge])
        np.multiply(lag[:, lead_edge], factor, out=s[:, lead_edge])


def _box_sums(z: np.ndarray, r: int, work: list) -> np.ndarray:
    """Sums of ``r`` consecutive cells: column ``j`` of the result sums ``z[:, j+1 .. j+r]``.

    Short windows double up: the sums of 2, 4, 8, ... cells are each one
    addition of two shifted copies of the previous ones, and the set bits of
    ``r`` are added together [1]_; this takes ``floor(log2 r)`` additions plus
    two per further set bit. Longer windows take one cumulative sum and one
    difference [2]_ (exact modulo ``2**64``, [3]_). ``z`` is overwritten.

    References
    ----------
    .. [1] common practice, no source (binary decomposition of a sliding sum).
    .. [2] Blelloch 1990, see the module references.
    .. [3] Knuth 1997, sec. 4.3.2, see the module references.
    """
    rows, n = z.shape
    top = r.bit_length() - 1
    if top + 2 * (r.bit_count() - 1) > 6:
        c = np.cumsum(z, axis=1, out=_take(work, z.shape))
        return np.subtract(c[:, r:], c[:, :-r], out=z[:, : n - r])
    cur, spare = z[:, 1:], _take(work, (rows, n - 1))
    acc, covered = None, 0  # acc[:, j] = sum of `covered` cells from column j
    for i in range(top + 1):
        span = 1 << i
        if i:  # cur becomes the sums of `span` cells
            half = span >> 1
            cur, spare = np.add(cur[:, : n - span], cur[:, half : n - span + half], out=spare[:, : n - span]), cur
        if r >> i & 1:
            if covered == 0 and i == top:
                return cur
            if covered == 0:
                acc = np.array(cur)  # a copy: cur's buffer is reused
            else:
                width = n - covered - span
                np.add(acc[:, :width], cur[:, covered : covered + width], out=acc[:, :width])
            covered += span
    return acc[:, : n - r]


def _empty(n: int) -> PipelineOutput:
    return PipelineOutput(*(np.empty(n, dtype=np.int64 if f in ("cut", "threshold") else bool) for f in FIELDS))


def run_fast(spec: BlockSpec, samples, last) -> PipelineOutput:
    """Output words of a whole stimulus stream (``docs/bit-true.md`` sections 1-8).

    Parameters
    ----------
    spec : BlockSpec
    samples : array_like of int, shape (n,)
        Input samples, ``0 .. 2**input_bits - 1``.
    last : array_like of bool, shape (n,)
        Last markers; the final sample must carry one.

    Returns
    -------
    PipelineOutput
        One word per input sample, in order.

    Raises
    ------
    SpecError
        For bad samples or markers, a frame shorter than the window, or a
        stream that does not end with a last marker.
    """
    pipe = FastPipeline(spec)
    out = pipe.push(samples, last)
    pipe.finish()
    return out


def statistic(spec: BlockSpec, samples) -> np.ndarray:
    """The noise statistic S at every CUT of one frame (``docs/bit-true.md`` section 3).

    Parameters
    ----------
    spec : BlockSpec
    samples : array_like of int, shape (L,)
        One frame, ``L >= W``, values ``0 .. 2**input_bits - 1``.

    Returns
    -------
    numpy.ndarray of int64, shape (L,)
        S before the multiplication by ``A``: the sum of both sides (CA), the
        larger or smaller side sum (GO, SO) or the ``k``-th smallest reference
        cell (OS); where one side is incomplete under ``one-sided``, twice the
        complete side's sum (CA), that sum (GO, SO) or its ``ceil(k/2)``-th
        smallest cell (OS). Under ``skip`` the value where the window does not
        fit is the one computed with zero cells, which the pipeline discards.
        The estimate alpha multiplies is ``S / D`` with ``D = spec.mean_divisor``.
    """
    pipe = FastPipeline(spec)
    x, _ = pipe._check(samples, np.zeros(np.shape(samples), dtype=bool))
    length = x.size
    pipe._check_lengths(length, np.zeros(0, dtype=np.int64), length)
    s = np.empty((1, length), dtype=np.uint64)
    z = pipe._cells(x[None, :], 0, 0, length, length, 1, pipe._select.destination(1, length) if pipe._select else None)
    _statistic_into(spec, z, length, *_edges(0, length, length, pipe._h), s, pipe._work, pipe._select)
    return s[0].view(np.int64)

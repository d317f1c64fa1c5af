"""Structural (cycle-stepped) bit-accurate model of the streaming CFAR pipeline.

This is the executable form of ``docs/bit-true.md``: one object holds the
registers of the reference design and :meth:`StructuralPipeline.clock` moves
them by one clock edge. It mirrors the hardware rather than the formulas:

- an explicit window shift register of ``W = 2R + 2G + 1`` cells, newest cell
  at position 0, the CUT at position ``H = R + G``; each cell carries two
  sideband bits, ``body`` (a frame sample at its own place, as opposed to a
  reset or drain zero or a wrapped copy) and ``last``;
- explicit lagging and leading running-sum registers updated as
  ``(sum + entering - leaving) mod 2**W_S``;
- the frame drain (``H`` zeros shifted in after each last sample, input
  refused meanwhile), or under ``circular`` a frame store that replays
  ``x[L-H..L-1], x[0..L-1], x[0..H-1]`` through the same window;
- ``pipeline_stages`` output registers, all held while the output is not
  ready.

Everything the output word needs is derived from the register contents
alone: the window-valid flag is "the oldest and the newest cell are both
frame samples", a side is incomplete when its outer end cell is not. No frame
index or length is kept anywhere, as in the hardware.

The model is slow by design (Python integers, one call per clock). The fast
vectorised model (``refmodel/fixedpoint/pipeline_fast.py``) must produce the same words;
``tests/test_pipeline_equivalence.py`` checks that.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..block_spec import BlockSpec
from ..errors import require
from .fixed_arith import apply_overflow, scale_product
from .word_format import PipelineOutput, output_field_offsets, pack_input, unpack_output

# A window cell: (value, body, last). Reset and drain cells are _ZERO.
_ZERO = (0, False, False)
#: Longest frame under ``circular``, which stores the whole frame (docs/bit-true.md section 1).
MAX_CIRCULAR_FRAME = 1 << 24


class StructuralPipeline:
    """Registers of one streaming CFAR block, advanced one clock at a time.

    Parameters
    ----------
    spec : BlockSpec
        The block (formats, detector, edge policy, pipeline stages).

    Notes
    -----
    The handshake is that of a valid/ready stream (AXI4-Stream style): in a
    call to :meth:`clock` the source offers ``in_word`` when ``in_valid`` is
    true and the word is taken when the block is ready; the sink takes the
    presented output word when ``out_ready`` is true. While ``out_ready`` is
    false every register holds (``docs/bit-true.md`` section 9).
    """

    def __init__(self, spec: BlockSpec):
        self.spec = spec
        R, G = spec.ref_per_side, spec.guard_per_side
        self._R, self._G, self._H, self._W = R, G, spec.half_window, spec.window_length
        self._sum_mask = (1 << spec.sum_bits) - 1
        self._in_mask = (1 << spec.input_bits) - 1
        self._off = {name: lsb for name, (lsb, _w) in output_field_offsets(spec).items()}
        self._circular = spec.edge == "circular"
        self._A = spec.alpha_int  # the constant A of section 4, fixed at build time
        self.reset()

    # ---- state ------------------------------------------------------------
    def reset(self) -> None:
        """Synchronous reset: window cells, sums and output registers cleared."""
        self.window: list[tuple[int, bool, bool]] = [_ZERO] * self._W  # position 0 = leading end
        self.sum_lag = 0  # sum of window[H+G+1 .. 2H], mod 2**W_S
        self.sum_lead = 0  # sum of window[0 .. R-1], mod 2**W_S
        self.stages: list[int | None] = [None] * self.spec.pipeline_stages  # None = bubble
        self.drain_left = 0  # non-circular: drain zeros still to shift in
        self.store: list[tuple[int, bool]] = []  # circular: the frame being stored
        self.replay: list[tuple[int, bool, bool]] = []  # circular: cells still to feed, in order
        self.cycle = 0

    # ---- one clock edge ------------------------------------------------------
    def clock(self, in_valid: bool, in_word: int, out_ready: bool) -> tuple[bool, int | None]:
        """Advance one clock.

        Parameters
        ----------
        in_valid : bool
            The source offers ``in_word``.
        in_word : int
            Stimulus word: sample in ``[W_in-1:0]``, last marker in bit ``W_in``.
        out_ready : bool
            The sink takes the presented output word.

        Returns
        -------
        accepted : bool
            ``in_word`` was taken.
        out_word : int or None
            The output word handed to the sink in this cycle.
        """
        self.cycle += 1
        if not out_ready:  # the whole pipeline holds
            return False, None
        emitted = self.stages[-1]
        accepted = False
        cell = None
        if self.drain_left:
            cell = _ZERO
            self.drain_left -= 1
        elif self.replay:
            cell = self.replay.pop()
        elif in_valid:
            accepted = True
            x = in_word & self._in_mask
            last = bool((in_word >> self.spec.input_bits) & 1)
            if self._circular:
                self.store.append((x, last))
                if last:
                    self._load_replay()
            else:
                cell = (x, True, last)
                if last:
                    self.drain_left = self._H
        formed = self._shift(cell) if cell is not None else None
        self.stages = [formed] + self.stages[:-1]
        return accepted, emitted

    def _load_replay(self) -> None:
        """Circular policy: queue ``x[L-H..L-1], x[0..L-1], x[0..H-1]`` (only the middle run is ``body``)."""
        frame, H = self.store, self._H
        head = [(x, False, False) for x, _ in frame[len(frame) - H :]]
        body = [(x, True, last) for x, last in frame]
        tail = [(x, False, False) for x, _ in frame[:H]]
        self.replay = (head + body + tail)[::-1]  # popped from the end
        self.store = []

    def _shift(self, cell: tuple[int, bool, bool]) -> int | None:
        """Shift ``cell`` into the window; return the word formed for the new CUT, if it is a sample."""
        win, R, H = self.window, self._R, self._H
        # Running sums: the entering and leaving cells of each side (section 3).
        self.sum_lead = (self.sum_lead + cell[0] - win[R - 1][0]) & self._sum_mask
        self.sum_lag = (self.sum_lag + win[H + self._G][0] - win[-1][0]) & self._sum_mask
        win.insert(0, cell)
        win.pop()
        cut, is_sample, last = win[H]
        if not is_sample:
            return None
        return self._word(cut, last)

    # ---- the datapath of one output word -------------------------------------
    def _word(self, cut: int, last: bool) -> int:
        spec, win, H = self.spec, self.window, self._H
        lag_ok, lead_ok = win[2 * H][1], win[0][1]
        valid = lag_ok and lead_ok
        if spec.edge == "skip" and not valid:
            t, det = 0, False
        else:
            side = None  # one-sided policy with an incomplete side: the complete side's cells
            if spec.edge == "one-sided" and not valid:
                side = "lead" if lead_ok else "lag"
            s = self._statistic(side)
            # Sections 5-6: product S * A, rounding to F_T fraction bits, overflow into W_T bits.
            t0 = scale_product(s, self._A, spec.drop_bits, spec.rounding, spec.truncate_partials)
            t = apply_overflow(t0, spec.threshold_bits, spec.overflow)
            c = cut << spec.threshold_frac_bits
            det = c > t if spec.compare == ">" else c >= t
        o = self._off
        return cut | (t << o["threshold"]) | (det << o["det"]) | (valid << o["valid"]) | (last << o["last"])

    def _statistic(self, side: str | None) -> int:
        """The noise statistic S of section 3; ``side`` names the only complete side, if any."""
        spec, win, R, G, H = self.spec, self.window, self._R, self._G, self._H
        kind = spec.kind
        if kind == "os":
            lead = [c[0] for c in win[:R]]
            lag = [c[0] for c in win[H + G + 1 :]]
            if side is None:
                return sorted(lag + lead)[spec.rank - 1]
            return sorted(lead if side == "lead" else lag)[spec.os_side_rank - 1]
        if side is not None:
            s_side = self.sum_lead if side == "lead" else self.sum_lag
            return s_side << 1 if kind == "ca" else s_side
        if kind == "ca":
            return self.sum_lag + self.sum_lead
        return max(self.sum_lag, self.sum_lead) if kind == "go" else min(self.sum_lag, self.sum_lead)


# --------------------------------------------------------------------------
# Driving a whole stream
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class StructuralRun:
    """What a testbench would record from one run of the structural model.

    Attributes
    ----------
    words : numpy.ndarray
        The output words, in order: ``uint64``, or Python integers (object
        dtype) when the word is wider than 64 bits.
    accept_cycle : numpy.ndarray of int64
        Clock cycle (1-based) in which each input sample was taken.
    emit_cycle : numpy.ndarray of int64
        Clock cycle in which each output word was handed to the sink.
    cycles : int
        Clock cycles run in all.
    """

    words: np.ndarray
    accept_cycle: np.ndarray
    emit_cycle: np.ndarray
    cycles: int


def check_stream(spec: BlockSpec, samples, last) -> tuple[np.ndarray, np.ndarray]:
    """Validate a stimulus stream (``docs/bit-true.md`` section 1); return ``(samples int64, last bool)``.

    Raises
    ------
    SpecError
        For samples out of ``0 .. 2**input_bits - 1``, arrays of different
        lengths, a final sample without the last marker, a frame shorter
        than the window, or under ``circular`` a frame over ``2**24`` samples.
    """
    x = np.asarray(samples)
    m = np.asarray(last)
    top = (1 << spec.input_bits) - 1
    require(x.ndim == 1 and m.shape == x.shape, "last", f"shapes {x.shape} and {m.shape}",
            "one-dimensional samples and last markers of the same length")
    require(x.dtype.kind in "iu", "samples", f"dtype {x.dtype}", "integers")
    require(m.dtype.kind in "biu", "last", f"dtype {m.dtype}", "booleans")
    x = x.astype(np.int64)
    m = m.astype(bool)
    if x.size:
        require(bool(np.all((x >= 0) & (x <= top))), "samples", f"values {x.min()}..{x.max()}",
                f"integers 0..{top} (fixed.input_bits = {spec.input_bits})")
        require(bool(m[-1]), "last", "the final sample has no last marker", "a stream that ends a frame")
        ends = np.flatnonzero(m)
        lengths = np.diff(np.concatenate([[-1], ends]))
        require(int(lengths.min()) >= spec.window_length, "frame length", f"a frame of {int(lengths.min())} samples",
                f"frames of at least the window length 2R+2G+1 = {spec.window_length}")
        if spec.edge == "circular":  # the whole frame is stored
            require(int(lengths.max()) <= MAX_CIRCULAR_FRAME, "frame length", f"a frame of {int(lengths.max())} samples",
                    f"frames of at most {MAX_CIRCULAR_FRAME} samples under edge = \"circular\"")
    return x, m


def simulate(
    spec: BlockSpec,
    samples,
    last,
    *,
    in_valid: Sequence[bool] | None = None,
    out_ready: Sequence[bool] | None = None,
) -> StructuralRun:
    """Clock a whole stream through a fresh :class:`StructuralPipeline`.

    Parameters
    ----------
    spec : BlockSpec
    samples : array_like of int
        Input samples, ``0 .. 2**input_bits - 1``.
    last : array_like of bool
        Last markers; the final sample must carry one and every frame must
        be at least one window long.
    in_valid, out_ready : sequence of bool, optional
        Per-cycle source-valid and sink-ready patterns (index 0 = first
        cycle); beyond their end, and when omitted, they are true (full
        rate).

    Returns
    -------
    StructuralRun
    """
    x, m = check_stream(spec, samples, last)
    words_in = [int(w) for w in pack_input(spec, x, m)]
    pipe = StructuralPipeline(spec)
    n = len(words_in)
    accept = np.zeros(n, dtype=np.int64)
    emit = np.zeros(n, dtype=np.int64)
    out: list[int] = []
    i = 0
    # Generous bound: every sample costs at most L + 2H + stages cycles plus the stalls offered.
    stalls = sum(len(p) for p in (in_valid, out_ready) if p is not None)
    limit = 4 * (n + spec.window_length + spec.pipeline_stages) + stalls + 16
    while len(out) < n:
        c = pipe.cycle
        require(c < limit, "stream", "the structural model stopped producing output words", "a stream it can finish")
        valid = i < n and (in_valid is None or c >= len(in_valid) or bool(in_valid[c]))
        ready = out_ready is None or c >= len(out_ready) or bool(out_ready[c])
        took, word = pipe.clock(valid, words_in[i] if i < n else 0, ready)
        if took:
            accept[i] = pipe.cycle
            i += 1
        if word is not None:
            emit[len(out)] = pipe.cycle
            out.append(word)
    words = np.array(out, dtype=np.uint64 if spec.output_bits <= 64 else object)
    return StructuralRun(words, accept, emit, pipe.cycle)


def run_structural(spec: BlockSpec, samples, last) -> PipelineOutput:
    """Output fields for a stimulus stream, from the structural model at full rate.

    The counterpart of the fast model's :func:`refmodel.fixedpoint.pipeline_fast.run_fast`;
    see :func:`simulate` for the arguments and for stalls and timing.
    """
    words = simulate(spec, samples, last).words
    if spec.output_bits <= 64:
        return unpack_output(spec, words)
    fields = {}  # wider than uint64: the fields of each Python-integer word (section 8)
    for name, (lsb, width) in output_field_offsets(spec).items():
        v = (words >> lsb) & ((1 << width) - 1)
        fields[name] = v.astype(np.int64) if name in ("cut", "threshold") else v.astype(bool)
    return PipelineOutput(**fields)

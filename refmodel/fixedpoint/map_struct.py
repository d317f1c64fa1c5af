"""Structural bit-accurate model of the range-Doppler (map) pipeline: one window-stream step at a time.

This is the executable form of ``docs/bit-true-2d.md``. It mirrors the
hardware rather than the formulas:

- the **window stream** (section 2): each map is fed as its padded map, line
  by line along the slow stream axis, ``P_f = L_f + 2H_f`` cells a line and
  ``P_s = L_s + 2H_s`` lines, pad cells being zeros or the wrapped map cells;
  every cell carries two sideband bits, ``body_s`` and ``body_f`` (a map cell
  along that axis, not a pad), and the last marker;
- ``2H_s`` **line buffers** of ``P_f`` cells in cascade, so that each step
  presents one column of ``W_s`` cells (section 3);
- a **window register** of ``W_s x W_f`` cells, shifted along the fast axis;
- per rectangle of the window's reference cells a **column-sum shift
  register** of ``W_f`` entries and a **running rectangle sum**, updated as
  ``(sum + entering column sum - leaving column sum) mod 2**W_S``;
- ``pipeline_stages`` output registers.

The window-valid and skip decisions come from the sideband bits of the
window's edge cells alone; no map index is kept. The model is slow by design
(Python integers, one call per step). :mod:`refmodel.fixedpoint.map_fast`
must give the same words; ``tests/test_map_pipeline.py`` checks that.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterator

import numpy as np

from ..map_spec import MapSpec
from .map_fast import check_samples
from .word_format import PipelineOutput, output_field_offsets, unpack_output


@dataclass(frozen=True)
class Cell:
    """One cell of the window stream."""

    value: int
    body_s: bool  # a map line, not a pad line
    body_f: bool  # a map column, not a pad column
    last: bool


_ZERO = Cell(0, False, False, False)


def window_stream(spec: MapSpec, cells) -> Iterator[Cell]:
    """The padded map of one map (cells in stream order), line after line (section 2).

    Padded line ``p``, position ``q`` holds map line ``i = p - H_s``, column ``j = q - H_f``;
    an index outside the map is wrapped under ``circular`` on its axis and makes the cell 0 otherwise.
    """
    sf = spec.slow_fast
    ls, lf = sf["slow"]["length"], sf["fast"]["length"]
    es, ef = sf["slow"]["edge"], sf["fast"]["edge"]
    _, _, hs, hf = spec.stream_window
    m = [int(v) for v in np.asarray(cells).ravel()]
    for p in range(ls + 2 * hs):
        i = p - hs
        in_s = 0 <= i < ls
        si = i % ls if (in_s or es == "circular") else None
        for q in range(lf + 2 * hf):
            j = q - hf
            in_f = 0 <= j < lf
            fj = j % lf if (in_f or ef == "circular") else None
            v = m[si * lf + fj] if si is not None and fj is not None else 0
            yield Cell(v, in_s, in_f, in_s and in_f and i == ls - 1 and j == lf - 1)


class MapStructural:
    """Registers and line buffers of one map block, advanced one window-stream step at a time.

    Parameters
    ----------
    spec : MapSpec
    """

    def __init__(self, spec: MapSpec):
        self.spec = spec
        self._ws, self._wf, self._hs, self._hf = spec.stream_window
        self._pf = spec.padded_line
        self._off = {name: lsb for name, (lsb, _w) in output_field_offsets(spec).items()}
        # One running rectangle per (part, term): (part, sign, s0, f0, n_s, n_f).
        self._terms = [(part,) + box for part in spec.parts for box in spec.stream_boxes(part)]
        self._mask = {part: (1 << spec.part_bits(part)) - 1 for part in spec.parts}
        self._member = [(a, b) for a, b in zip(*np.nonzero(spec.stream_member()))]
        self.reset()

    def reset(self) -> None:
        """Reset: line buffers, window, column sums, running sums and stages cleared."""
        self.lines = [[_ZERO] * self._pf for _ in range(2 * self._hs)]  # line buffer k: k+1 lines back
        self.ptr = 0
        self.window = [[_ZERO] * self._wf for _ in range(self._ws)]  # [row][col], row 0 = oldest line
        self.col_sums = [[0] * self._wf for _ in self._terms]
        self.box = [0] * len(self._terms)
        self.stages: list[int | None] = [None] * self.spec.pipeline_stages

    def step(self, cell: Cell | None) -> int | None:
        """One step: shift ``cell`` in (None: a bubble, nothing moves but the stages); return the word leaving."""
        out = self.stages[-1]
        formed = self._shift(cell) if cell is not None else None
        self.stages = [formed] + self.stages[:-1]
        return out

    def _shift(self, cell: Cell) -> int | None:
        # Line buffers in cascade: the column of W_s cells, oldest line first.
        col = [cell]
        for buf in self.lines:
            col.append(buf[self.ptr])
        for k, buf in enumerate(self.lines):
            buf[self.ptr] = col[k]
        self.ptr = (self.ptr + 1) % self._pf
        col = col[::-1]
        for r in range(self._ws):
            self.window[r] = self.window[r][1:] + [col[r]]
        # Column sums and running rectangle sums.
        for t, (part, _sign, s0, f0, ns, nf) in enumerate(self._terms):
            reg = self.col_sums[t]
            shifted_out = reg[0]
            reg[:] = reg[1:] + [sum(c.value for c in col[s0 : s0 + ns])]
            leaving = reg[f0 - 1] if f0 else shifted_out
            self.box[t] = (self.box[t] + reg[f0 + nf - 1] - leaving) & self._mask[part]
        cut = self.window[self._hs][self._hf]
        if not (cut.body_s and cut.body_f):
            return None
        return self._word(cut)

    def _statistic(self) -> int:
        spec = self.spec
        if spec.kind == "os":
            cells = sorted(self.window[a][b].value for a, b in self._member)
            return cells[spec.rank - 1]
        sums = {part: 0 for part in spec.parts}
        for t, (part, sign, *_rest) in enumerate(self._terms):
            sums[part] += sign * self.box[t]
        sums = {part: v & self._mask[part] for part, v in sums.items()}
        if spec.kind == "ca":
            return sums["all"]
        return max(sums["lag"], sums["lead"]) if spec.kind == "go" else min(sums["lag"], sums["lead"])

    def _word(self, cut: Cell) -> int:
        spec, win, hs, hf = self.spec, self.window, self._hs, self._hf
        fits_f = win[hs][0].body_f and win[hs][-1].body_f
        fits_s = win[0][hf].body_s and win[-1][hf].body_s
        range_fits, doppler_fits = (fits_f, fits_s) if spec.order == "range-fast" else (fits_s, fits_f)
        valid = range_fits and (doppler_fits or spec.doppler_edge == "circular")
        skip = (spec.range_edge == "skip" and not range_fits) or (spec.doppler_edge == "skip" and not doppler_fits)
        if skip:
            t, det = 0, False
        else:
            t = int(spec.threshold_from_statistic(self._statistic()))
            c = cut.value << spec.threshold_frac_bits
            det = c > t if spec.compare == ">" else c >= t
        o = self._off
        return (cut.value | (t << o["threshold"]) | (int(det) << o["det"]) | (int(valid) << o["valid"])
                | (int(cut.last) << o["last"]))


def run_map_structural(spec: MapSpec, samples, last) -> PipelineOutput:
    """Output fields for a stream of whole maps, from the structural model.

    Every map's window stream is stepped through one :class:`MapStructural`
    (registers carry over from map to map, as in hardware); after the final
    map the stages are flushed with bubbles.
    """
    x, mark = check_samples(spec, samples, last)
    n = spec.map_cells
    from ..errors import require

    require(x.size % n == 0 and bool(np.array_equal(np.flatnonzero(mark), np.arange(n - 1, x.size, n))),
            "frame length", "the stream is not whole maps with a last marker on each map's last cell",
            f"maps of exactly {n} cells")
    core = MapStructural(spec)
    words: list[int] = []
    for k in range(x.size // n):
        for cell in window_stream(spec, x[k * n : (k + 1) * n]):
            w = core.step(cell)
            if w is not None:
                words.append(w)
    for _ in range(spec.pipeline_stages):
        w = core.step(None)
        if w is not None:
            words.append(w)
    return unpack_output(spec, np.array(words, dtype=np.uint64))

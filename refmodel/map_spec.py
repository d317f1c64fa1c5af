"""The map block spec: a range-Doppler CFAR block described in the same TOML file as a 1D block.

A spec with a ``[map]`` section describes a 2D block: the detector slides a
window over range-Doppler maps that stream in cell by cell.
:func:`refmodel.block_spec.spec_from_dict` hands such a spec to
:func:`map_spec_from_dict`, which returns a frozen :class:`MapSpec`.

The arithmetic after the noise statistic (constant, product, rounding,
overflow, threshold width, output word) is the 1D block's, unchanged: a map
block holds an **arithmetic twin**, the 1D :class:`~refmodel.block_spec.BlockSpec`
whose statistic has the same range and whose constant has the same divisor,
and every derived width and constant comes from it. The twin has
``R' = N/2`` reference cells per side for CA and OS (so ``2R' = N``, and N is
always even) and ``R' = N_half`` for GO and SO (each 1D side is one range
half), with no guard cells. Field reference: ``docs/block-spec.md`` section
"[map]"; arithmetic: ``docs/bit-true-2d.md``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Mapping

from .block_spec import DOWNSTREAM_SECTIONS, BlockSpec, _DETECTOR_KEYS, _FIXED_KEYS, _STREAM_KEYS, spec_from_dict
from .errors import SpecError, require
from .floatmodel.window2d import CROSS, RING, WINDOW_SHAPES, Window2D, make_window
from .spec_fields import choice, choices, integer, table

ORDERS = ("range-fast", "doppler-fast")
#: Edge policies of a map block, per axis (``one-sided`` is a 1D and float-model policy only).
MAP_EDGES = ("skip", "zero-pad", "circular")
#: Largest map: every cell of a map may have to be stored (circular along the slow axis).
MAX_MAP_CELLS = 1 << 24
MAX_AXIS = 1 << 16
#: Largest reference cell count (the twin's 2R' stays within 1D's 2 * 4096).
MAX_CELLS = 8192

_MAP_KEYS = {
    "range_cells": None,
    "doppler_bins": None,
    "order": "doppler-fast",
    "window": RING,
    "ref_range": None,
    "ref_doppler": None,
    "guard_range": 0,
    "guard_doppler": 0,
    "range_edge": "zero-pad",
    "doppler_edge": "circular",
}
_MAP_DETECTOR_KEYS = {k: v for k, v in _DETECTOR_KEYS.items()
                      if k not in ("ref_cells_per_side", "guard_cells_per_side", "edge")}
_NOT_FOR_MAPS = {
    "fixed.sum_bits": "the running-sum widths follow from the window (docs/bit-true-2d.md section 3)",
    "stream.frame_length": "the map size map.range_cells x map.doppler_bins gives it",
}

# Attributes read straight from the arithmetic twin: formats and everything after the statistic.
_TWIN = frozenset((
    "kind", "rank", "compare", "alpha", "design_pfa", "input_bits", "alpha_frac_bits", "alpha_csd_digits",
    "truncate_partials", "mean_by_shift", "threshold_frac_bits", "threshold_bits", "rounding", "overflow",
    "pipeline_stages", "mean_divisor", "statistic_bits", "statistic_max", "mean_shift", "alpha_target",
    "alpha_int", "alpha_digits", "alpha_bits", "product_frac_bits", "drop_bits", "product_bits",
    "realised_alpha", "output_bits", "input_word_bits", "threshold_from_statistic", "threshold_error_bound",
    "n_ref",
))


@dataclass(frozen=True)
class MapSpec:
    """A validated range-Doppler block spec with its derived quantities.

    Parameters
    ----------
    twin : BlockSpec
        The 1D arithmetic twin (see the module notes); every format field and
        every width after the statistic is read from it.
    window : Window2D
        Guard rectangle and reference ring, or cross-shaped window.
    range_cells, doppler_bins : int
        Map size ``L_r x L_d``.
    order : {"range-fast", "doppler-fast"}
        Streaming order: which index runs fastest in the stream.
    range_edge, doppler_edge : {"skip", "zero-pad", "circular"}
        Edge policy along each axis.
    sections : mapping
        Raw downstream sections (``vectors``, ``ports``, ``study``).
    source : str or None
        Path the spec was read from.

    Notes
    -----
    Attribute names of the 1D spec that a map block has no meaning for (for
    example ``ref_per_side``) raise :class:`SpecError` naming ``map``, so a
    command that supports only 1D blocks stops with one line.
    """

    twin: BlockSpec
    window: Window2D
    range_cells: int
    doppler_bins: int
    order: str
    range_edge: str
    doppler_edge: str
    sections: Mapping[str, Any] = field(default_factory=dict, compare=False)
    source: str | None = field(default=None, compare=False)

    is_map = True

    def __getattr__(self, name: str):
        if name in _TWIN:
            return getattr(self.twin, name)
        if name.startswith("__"):
            raise AttributeError(name)
        raise SpecError("map", f"this command supports 1D blocks only so far ({name!r} is a 1D block property; "
                        "map blocks go through design, vectors, check and study)", "a 1D block spec (no [map] section)")

    # ---- geometry -------------------------------------------------------
    @property
    def n_cells(self) -> int:
        """Reference cells ``N`` of the window."""
        return self.window.n_cells

    @property
    def n_half(self) -> int:
        """Cells of each range half ``N_half`` (GO/SO)."""
        return self.window.n_half

    @property
    def map_cells(self) -> int:
        """Cells per map, ``L_r * L_d``: the length of one frame of the stream."""
        return self.range_cells * self.doppler_bins

    @property
    def window_length(self) -> int:
        """Cells of the window rectangle, ``Wd * Wr`` (every map holds at least that many)."""
        return self.window.wd * self.window.wr

    @property
    def fast_axis(self) -> str:
        """``"range"`` or ``"doppler"``: the axis whose index runs fastest in the stream."""
        return "range" if self.order == "range-fast" else "doppler"

    @property
    def slow_fast(self) -> dict:
        """Per stream axis: length, half window ``H``, edge policy; ``slow`` and ``fast`` keys."""
        w = self.window
        rng = {"axis": "range", "length": self.range_cells, "half": w.hr, "edge": self.range_edge}
        dop = {"axis": "doppler", "length": self.doppler_bins, "half": w.hd, "edge": self.doppler_edge}
        return {"slow": dop, "fast": rng} if self.order == "range-fast" else {"slow": rng, "fast": dop}

    @property
    def padded_line(self) -> int:
        """Cells of a padded line of the window stream, ``P_f = L_f + 2 H_f``."""
        f = self.slow_fast["fast"]
        return f["length"] + 2 * f["half"]

    @property
    def padded_lines(self) -> int:
        """Lines of the padded map, ``P_s = L_s + 2 H_s``."""
        s = self.slow_fast["slow"]
        return s["length"] + 2 * s["half"]

    @property
    def stream_window(self) -> tuple[int, int, int, int]:
        """``(W_s, W_f, H_s, H_f)``: window extent and half extent along the slow and fast stream axes."""
        w = self.window
        if self.order == "range-fast":
            return w.wd, w.wr, w.hd, w.hr
        return w.wr, w.wd, w.hr, w.hd

    def stream_boxes(self, part: str) -> tuple[tuple[int, int, int, int, int], ...]:
        """The rectangles of :meth:`Window2D.boxes` as ``(sign, s0, f0, n_s, n_f)`` in stream axes."""
        boxes = self.window.boxes(part)
        if self.order == "range-fast":
            return boxes
        return tuple((sg, r0, d0, nr, nd) for sg, d0, r0, nd, nr in boxes)

    def stream_member(self, part: str = "all"):
        """Boolean ``(W_s, W_f)`` mask of the reference cells of ``part`` (``"all"``, ``"lag"``, ``"lead"``)."""
        import numpy as np

        w = self.window
        m = w.member()
        r = np.arange(-w.hr, w.hr + 1)[None, :]
        if part == "lag":
            m = m & (r < 0)
        elif part == "lead":
            m = m & (r > 0)
        return m if self.order == "range-fast" else m.T

    def rd_map(self, cells):
        """One map in stream order (``L_r * L_d`` cells) as an array ``(..., doppler_bins, range_cells)``,
        the layout of the float model :func:`refmodel.floatmodel.float_cfar2d.cfar_2d`."""
        import numpy as np

        a = np.asarray(cells)
        if self.order == "range-fast":
            return a.reshape(a.shape[:-1] + (self.doppler_bins, self.range_cells))
        return np.swapaxes(a.reshape(a.shape[:-1] + (self.range_cells, self.doppler_bins)), -1, -2)

    def stream_cells(self, rd_map):
        """Inverse of :meth:`rd_map`: maps ``(..., doppler_bins, range_cells)`` to cells in stream order."""
        import numpy as np

        a = np.asarray(rd_map)
        if self.order == "doppler-fast":
            a = np.swapaxes(a, -1, -2)
        return a.reshape(a.shape[:-2] + (self.map_cells,))

    def part_bits(self, part: str) -> int:
        """Width of the running sums of ``part``: ``bitlen(N (2^W_in - 1))`` or ``bitlen(N_half (2^W_in - 1))``."""
        n = self.n_cells if part == "all" else self.n_half
        return (n * ((1 << self.input_bits) - 1)).bit_length()

    @property
    def parts(self) -> tuple[str, ...]:
        """The parts whose sums the detector uses: ``("all",)`` for CA, the halves for GO/SO, none for OS."""
        return {"ca": ("all",), "go": ("lag", "lead"), "so": ("lag", "lead")}.get(self.kind, ())

    # ---- widths ---------------------------------------------------------
    @property
    def sum_bits(self) -> int:
        """Width ``W_S`` of the running sums: ``bitlen(N (2^W_in - 1))`` for CA,
        ``bitlen(N_half (2^W_in - 1))`` for GO/SO, 0 for OS (no sums)."""
        full = (1 << self.input_bits) - 1
        if self.kind == "ca":
            return (self.n_cells * full).bit_length()
        if self.kind in ("go", "so"):
            return (self.n_half * full).bit_length()
        return 0

    @property
    def line_buffers(self) -> int:
        """Line buffers of the window stream, ``2 H_s`` (each one padded line long)."""
        return 2 * self.slow_fast["slow"]["half"]

    @property
    def line_buffer_bits(self) -> int:
        """Memory of the line buffers: ``2 H_s * P_f * W_in`` bits."""
        return self.line_buffers * self.padded_line * self.input_bits

    @property
    def store_cells(self) -> int:
        """Input cells stored before a map's window stream starts: the whole map under ``circular``
        along the slow axis, one line under ``circular`` along the fast axis only, else 0."""
        sf = self.slow_fast
        if sf["slow"]["edge"] == "circular":
            return self.map_cells
        if sf["fast"]["edge"] == "circular":
            return sf["fast"]["length"]
        return 0

    @property
    def store_bits(self) -> int:
        """Memory of the input store: the map (``L_s L_f W_in``) or two lines (``2 L_f W_in``), else 0."""
        sf = self.slow_fast
        if sf["slow"]["edge"] == "circular":
            return self.map_cells * self.input_bits
        if sf["fast"]["edge"] == "circular":
            return 2 * sf["fast"]["length"] * self.input_bits
        return 0

    @property
    def window_delay(self) -> int:
        """Window-stream steps from a CUT's padded cell to the cell that completes its window,
        ``H_s P_f + H_f``."""
        return self.slow_fast["slow"]["half"] * self.padded_line + self.slow_fast["fast"]["half"]

    @property
    def latency_cycles(self) -> int:
        """Cycles from a map's first input cell to its first output word, at full rate:
        ``store_cells + 2 (H_s P_f + H_f) + pipeline_stages`` (``docs/bit-true-2d.md`` section 9)."""
        return self.store_cells + 2 * self.window_delay + self.pipeline_stages

    @property
    def drain_cycles(self) -> int:
        """Window-stream steps per map that carry no input cell: ``P_s P_f - L_s L_f``."""
        return self.padded_lines * self.padded_line - self.map_cells

    def design_report(self) -> dict:
        """The 2D lines of ``cfarvec design --spec``: window, reference cell counts, memory, timing."""
        w = self.window
        return {
            "window": w.shape,
            "map": [self.range_cells, self.doppler_bins],
            "order": self.order,
            "range_edge": self.range_edge,
            "doppler_edge": self.doppler_edge,
            "guard_rectangle": [2 * w.guard_doppler + 1, 2 * w.guard_range + 1],
            "window_rectangle": [w.wd, w.wr],
            "ref_cells": self.n_cells,
            "half_cells": self.n_half,
            "design_cells": self.n_ref,
            "sum_bits": self.sum_bits,
            "line_buffers": self.line_buffers,
            "padded_line": self.padded_line,
            "line_buffer_bits": self.line_buffer_bits,
            "store_bits": self.store_bits,
            "window_delay": self.window_delay,
            "latency_cycles": self.latency_cycles,
            "drain_cycles": self.drain_cycles,
        }

    def to_dict(self, resolved: bool = False) -> dict:
        """The spec as TOML-able sections that :func:`spec_from_dict` reads back to an equal spec."""
        t = self.twin
        det = {"kind": t.kind, "compare": t.compare}
        if t.rank is not None:
            det["rank"] = t.rank
        if t.design_pfa is not None and not resolved:
            det["design_pfa"] = t.design_pfa
        else:
            det["alpha"] = t.alpha
        fixed = {k: getattr(t, k) for k in _FIXED_KEYS if k != "sum_bits"}
        w = self.window
        mp = {"range_cells": self.range_cells, "doppler_bins": self.doppler_bins, "order": self.order,
              "window": w.shape, "ref_range": w.ref_range, "ref_doppler": w.ref_doppler,
              "guard_range": w.guard_range, "guard_doppler": w.guard_doppler,
              "range_edge": self.range_edge, "doppler_edge": self.doppler_edge}
        return {"detector": det, "fixed": fixed, "stream": {"pipeline_stages": t.pipeline_stages}, "map": mp,
                **{k: dict(v) for k, v in self.sections.items()}}

    def derived(self) -> dict:
        """Derived widths, constants, memory and timing, for reports and manifests."""
        base = self.twin.derived()
        for k in ("window_length", "side_sum_bits", "latency_cycles", "drain_cycles"):
            base.pop(k)
        sf = self.slow_fast
        return {
            **base,
            "map_cells": self.map_cells,
            "window_rows_doppler": self.window.wd,
            "window_cols_range": self.window.wr,
            "window_length": self.window_length,
            "ref_cells": self.n_cells,
            "half_cells": self.n_half,
            "slow_axis": sf["slow"]["axis"],
            "fast_axis": sf["fast"]["axis"],
            "padded_line": self.padded_line,
            "padded_lines": self.padded_lines,
            "side_sum_bits": self.sum_bits,
            "line_buffers": self.line_buffers,
            "line_buffer_bits": self.line_buffer_bits,
            "store_cells": self.store_cells,
            "store_bits": self.store_bits,
            "window_delay": self.window_delay,
            "latency_cycles": self.latency_cycles,
            "drain_cycles": self.drain_cycles,
        }


def twin_ref_per_side(kind: str, window: Window2D) -> int:
    """``R'`` of the arithmetic twin: ``N/2`` for CA and OS, ``N_half`` for GO and SO."""
    return window.n_half if kind in ("go", "so") else window.n_cells // 2


def map_spec_from_dict(data: Mapping[str, Any], source: str | None = None) -> MapSpec:
    """Validate a spec mapping that holds a ``[map]`` section.

    Raises
    ------
    SpecError
        Naming the first offending field (``section.key``) and its allowed values.
    """
    known = ("detector", "fixed", "stream", "map") + DOWNSTREAM_SECTIONS
    for name in data:
        require(name in known, name, "unknown section", choices(known))
    for name, why in _NOT_FOR_MAPS.items():
        sec, key = name.split(".")
        raw = data.get(sec, {})
        require(not (isinstance(raw, Mapping) and key in raw), name, f"given with a [map] section ({why})",
                "leave it out for a map block")
    det = table(data, "detector", _MAP_DETECTOR_KEYS)
    mp = table(data, "map", _MAP_KEYS)
    kind = choice("detector.kind", det["kind"], tuple(("ca", "go", "so", "os")))

    for key in ("range_cells", "doppler_bins", "ref_range", "ref_doppler"):
        require(mp[key] is not None, f"map.{key}", "missing", "an integer" + (" >= 0" if key[:3] == "ref" else " >= 1"))
    lr = integer("map.range_cells", mp["range_cells"], 1, MAX_AXIS)
    ld = integer("map.doppler_bins", mp["doppler_bins"], 1, MAX_AXIS)
    require(lr * ld <= MAX_MAP_CELLS, "map.range_cells", f"a map of {lr} x {ld} = {lr * ld} cells",
            f"range_cells * doppler_bins <= {MAX_MAP_CELLS}")
    order = choice("map.order", mp["order"], ORDERS)
    shape = choice("map.window", mp["window"], WINDOW_SHAPES)
    rr = integer("map.ref_range", mp["ref_range"], 0, 4096)
    rd = integer("map.ref_doppler", mp["ref_doppler"], 0, 4096)
    gr = integer("map.guard_range", mp["guard_range"], 0, 4096)
    gd = integer("map.guard_doppler", mp["guard_doppler"], 0, 4096)
    win = make_window(shape, (rd, rr), (gd, gr), kind, field="map.ref_range",
                      names=("map.ref_doppler", "map.ref_range", "map.guard_doppler", "map.guard_range"))
    require(win.n_cells <= MAX_CELLS, "map.ref_range", f"the window holds {win.n_cells} reference cells",
            f"a window of at most {MAX_CELLS} reference cells")
    require(lr >= win.wr, "map.range_cells", f"got {lr}",
            f"an integer >= the window's range extent 2*ref_range + 2*guard_range + 1 = {win.wr}")
    require(ld >= win.wd, "map.doppler_bins", f"got {ld}",
            f"an integer >= the window's Doppler extent 2*ref_doppler + 2*guard_doppler + 1 = {win.wd}")
    range_edge = choice("map.range_edge", mp["range_edge"], MAP_EDGES)
    doppler_edge = choice("map.doppler_edge", mp["doppler_edge"], MAP_EDGES)

    fx = table(data, "fixed", {k: v for k, v in _FIXED_KEYS.items() if k != "sum_bits"})
    st = table(data, "stream", {k: v for k, v in _STREAM_KEYS.items() if k != "frame_length"})
    if fx["mean_by_shift"] is True:
        div = {"ca": win.n_cells, "go": win.n_half, "so": win.n_half}.get(kind)
        require(div is not None and div & (div - 1) == 0, "fixed.mean_by_shift",
                f"true, but the mean divisor is {div if div else 'not used by os'}",
                "true only when the divisor (N for ca, N_half for go/so) is a power of two")
    r_twin = twin_ref_per_side(kind, win)
    twin_det = {k: v for k, v in det.items() if v is not None}
    twin_det.update(ref_cells_per_side=r_twin, guard_cells_per_side=0, edge="zero-pad")
    twin_data = {"detector": twin_det, "fixed": {k: v for k, v in fx.items() if v is not None},
                 "stream": {"frame_length": 2 * r_twin + 1, "pipeline_stages": st["pipeline_stages"]}}
    twin = spec_from_dict(twin_data)
    sections = {}
    for name in DOWNSTREAM_SECTIONS:
        if name in data:
            require(isinstance(data[name], Mapping), name, f"got {type(data[name]).__name__}", "a table")
            sections[name] = dict(data[name])
    return MapSpec(twin=twin, window=win, range_cells=lr, doppler_bins=ld, order=order, range_edge=range_edge,
                   doppler_edge=doppler_edge, sections=MappingProxyType(sections), source=source)


def interior_twin(spec):
    """The block whose quantisation study is that of ``spec`` at cells where the window holds map cells only.

    For a :class:`MapSpec`, its arithmetic twin (the 1D block of ``R'`` reference cells per side, see
    the module notes) with the map spec's downstream sections: at such a cell the 2D statistic is a
    sum, maximum of two half sums, or order statistic of the same number of independent input words
    as the twin's, so its exact Pfa, Pd and Monte Carlo are the twin's. A 1D spec is returned as is.
    """
    if not isinstance(spec, MapSpec):
        return spec
    from dataclasses import replace

    label = f"{spec.source or 'in-memory map spec'} (map block: its arithmetic twin of {spec.n_ref} cells)"
    return replace(spec.twin, sections=spec.sections, source=label)


def is_map(spec: object) -> bool:
    """True for a :class:`MapSpec` (a range-Doppler block)."""
    return isinstance(spec, MapSpec)


__all__ = ["MapSpec", "map_spec_from_dict", "is_map", "interior_twin", "twin_ref_per_side", "ORDERS", "MAP_EDGES", "CROSS", "RING"]

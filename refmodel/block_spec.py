"""The block spec: one TOML file describing one streaming CFAR block.

:func:`load_spec` reads and validates a file, :func:`spec_from_dict` a
mapping (a notebook can build one in place); both return a frozen
:class:`BlockSpec` whose properties give every derived width and constant.
The field-by-field reference is ``docs/block-spec.md``; the arithmetic the
fields control is ``docs/bit-true.md``.

Sections owned here: ``[detector]``, ``[fixed]``, ``[stream]``. Sections
owned by later stages (``[vectors]``, ``[ports]``, ``[study]``) are kept as
plain dictionaries in :attr:`BlockSpec.sections` and validated by their
owners, so data still flows one way.
"""

from __future__ import annotations

import datetime
import math
import tomllib
from dataclasses import dataclass, field, replace
from functools import cached_property
from pathlib import Path
from types import MappingProxyType
from typing import Any, Mapping

from .errors import SpecError, require
from .input_files import MAX_SPEC_BYTES, read_text
from .spec_fields import boolean, choice, choices, integer, number, table
from .fixedpoint.fixed_arith import (OVERFLOW_MODES, ROUNDING_MODES, apply_overflow, naf_digits, quantise_constant,
                          scale_product)

KINDS = ("ca", "go", "so", "os")
EDGES = ("skip", "zero-pad", "one-sided", "circular")
COMPARES = (">", ">=")
DOWNSTREAM_SECTIONS = ("vectors", "ports", "study")
MAX_PRODUCT_BITS = 62
MAX_WORD_BITS = 64  # output words are packed into uint64
#: Largest threshold multiplier (alpha): the quantised constant must stay an integer a 62-bit product can hold.
MAX_ALPHA = 2.0**62

_DETECTOR_KEYS = {
    "kind": "ca",
    "ref_cells_per_side": None,
    "guard_cells_per_side": 0,
    "rank": None,
    "compare": ">",
    "edge": "skip",
    "alpha": None,
    "design_pfa": None,
}
_FIXED_KEYS = {
    "input_bits": 16,
    "sum_bits": None,
    "alpha_frac_bits": 12,
    "alpha_csd_digits": 0,
    "truncate_partials": False,
    "mean_by_shift": False,
    "threshold_frac_bits": 0,
    "threshold_bits": None,
    "rounding": "half-up",
    "overflow": "saturate",
}
_STREAM_KEYS = {
    "frame_length": 256,
    "pipeline_stages": 2,
}


@dataclass(frozen=True)
class BlockSpec:
    """A validated block spec with its derived quantities.

    Parameters
    ----------
    kind : {"ca", "go", "so", "os"}
        Detector kind.
    ref_per_side, guard_per_side : int
        Reference cells ``R >= 1`` and guard cells ``G >= 0`` on each side of the CUT.
    rank : int or None
        OS rank ``k`` in ``1..2R`` (OS only).
    compare : {">", ">="}
        Decision comparison of the CUT against the threshold.
    edge : {"skip", "zero-pad", "one-sided", "circular"}
        Edge policy.
    alpha : float
        Threshold multiplier (alpha), given or derived from ``design_pfa``.
    design_pfa : float or None
        The false-alarm probability the design was made for, when given.
    input_bits, sum_bits, alpha_frac_bits, alpha_csd_digits, threshold_frac_bits, threshold_bits : int
        Formats (see ``docs/block-spec.md``); ``sum_bits`` and ``threshold_bits``
        are already resolved from their automatic defaults.
    truncate_partials, mean_by_shift : bool
        Multiplier options.
    rounding : {"floor", "half-up", "half-even"}
    overflow : {"saturate", "wrap"}
    frame_length : int
        Default frame length for generated stimulus (frames in a stream may differ).
    pipeline_stages : int
        Register stages between the window centre and the output word.
    sections : mapping
        Raw downstream sections (``vectors``, ``ports``, ``study``).
    source : str or None
        Path the spec was read from.
    """

    kind: str
    ref_per_side: int
    guard_per_side: int
    rank: int | None
    compare: str
    edge: str
    alpha: float
    design_pfa: float | None
    input_bits: int
    sum_bits: int
    alpha_frac_bits: int
    alpha_csd_digits: int
    truncate_partials: bool
    mean_by_shift: bool
    threshold_frac_bits: int
    threshold_bits: int
    rounding: str
    overflow: str
    frame_length: int
    pipeline_stages: int
    sections: Mapping[str, Any] = field(default_factory=dict, compare=False)
    source: str | None = field(default=None, compare=False)

    # ---- geometry -------------------------------------------------------
    @property
    def window_length(self) -> int:
        """Cells in the window, ``2R + 2G + 1``."""
        return 2 * self.ref_per_side + 2 * self.guard_per_side + 1

    @property
    def half_window(self) -> int:
        """``R + G``: cells from the CUT to either end of the window."""
        return self.ref_per_side + self.guard_per_side

    @property
    def n_ref(self) -> int:
        """Total reference cells ``N = 2R``."""
        return 2 * self.ref_per_side

    @property
    def mean_divisor(self) -> int:
        """What the noise statistic is divided by to form the estimate alpha multiplies.

        ``2R`` for CA (sum of both sides), ``R`` for GO/SO (one side's sum), 1 for OS.
        """
        return {"ca": 2 * self.ref_per_side, "go": self.ref_per_side, "so": self.ref_per_side}.get(self.kind, 1)

    @property
    def os_side_rank(self) -> int | None:
        """OS rank used on a single side under the one-sided policy: ``ceil(k / 2)``."""
        return None if self.rank is None else (self.rank + 1) // 2

    # ---- widths ---------------------------------------------------------
    @property
    def side_sum_bits(self) -> int:
        """Bits that hold one side's sum without loss: ``bitlen(R * (2**W_in - 1))``."""
        return (self.ref_per_side * ((1 << self.input_bits) - 1)).bit_length()

    @property
    def statistic_bits(self) -> int:
        """Width of the noise statistic S fed to the multiplier."""
        if self.kind == "ca":
            return self.sum_bits + 1
        if self.kind in ("go", "so"):
            return self.sum_bits
        return self.input_bits

    @property
    def statistic_max(self) -> int:
        """Largest value S can take (full-scale input everywhere)."""
        full = (1 << self.input_bits) - 1
        if self.kind == "ca":
            return 2 * self.ref_per_side * full
        if self.kind in ("go", "so"):
            return self.ref_per_side * full
        return full

    @property
    def mean_shift(self) -> int:
        """Right shift ``s`` that forms the mean when ``mean_by_shift`` is set, else 0."""
        return int(math.log2(self.mean_divisor)) if self.mean_by_shift else 0

    @property
    def alpha_target(self) -> float:
        """The exact scaled constant before quantisation: ``alpha * 2**(F_A + s) / divisor``."""
        return self.alpha * 2.0 ** (self.alpha_frac_bits + self.mean_shift) / self.mean_divisor

    @cached_property
    def alpha_int(self) -> int:
        """The quantised constant A (an unsigned integer with ``alpha_frac_bits`` fraction bits)."""
        return quantise_constant(self.alpha_target, self.alpha_csd_digits)

    @cached_property
    def alpha_digits(self) -> list[tuple[int, int]]:
        """A as signed power-of-two terms ``[(sign, power), ...]`` (its NAF)."""
        return naf_digits(self.alpha_int)

    @property
    def alpha_bits(self) -> int:
        """Width of A."""
        return self.alpha_int.bit_length()

    @property
    def product_frac_bits(self) -> int:
        """Fraction bits of the full product ``S * A``: ``F_A + s``."""
        return self.alpha_frac_bits + self.mean_shift

    @property
    def drop_bits(self) -> int:
        """Fraction bits dropped when the product is rounded to the threshold: ``d = F_P - F_T``."""
        return self.product_frac_bits - self.threshold_frac_bits

    @property
    def product_bits(self) -> int:
        """Width of the full product ``S * A``."""
        return self.statistic_bits + self.alpha_bits

    @property
    def threshold_max(self) -> int:
        """``T_max`` of ``docs/bit-true.md`` section 6: no threshold before overflow handling exceeds it.

        ``T0`` at the largest statistic; with ``truncate_partials`` the sum of
        the positive NAF digits' truncated terms ``(S_max << p) >> d`` there
        (the negative digits only subtract). The default ``threshold_bits`` is
        ``max(1, bitlen(T_max))``.
        """
        if self.truncate_partials:
            return sum((self.statistic_max << p) >> self.drop_bits for sgn, p in self.alpha_digits if sgn > 0)
        return int(scale_product(self.statistic_max, self.alpha_int, self.drop_bits, self.rounding))

    @property
    def realised_alpha(self) -> float:
        """The threshold multiplier (alpha) the quantised constant realises: ``A * divisor / 2**(F_A + s)``."""
        return self.alpha_int * self.mean_divisor / 2.0 ** self.product_frac_bits

    @property
    def output_bits(self) -> int:
        """Width of one output word: CUT, threshold, detection, window-valid, last."""
        return self.input_bits + self.threshold_bits + 3

    @property
    def input_word_bits(self) -> int:
        """Width of one stimulus word: sample plus the last marker."""
        return self.input_bits + 1

    # ---- timing ---------------------------------------------------------
    @property
    def drain_cycles(self) -> int:
        """Input cycles refused after each frame's last sample, at full rate.

        ``R + G`` drain zeros for the non-circular policies; under ``circular``
        the stored frame is replayed through the window, ``L + 2(R + G)``
        cycles for a frame of ``stream.frame_length`` (``docs/bit-true.md`` section 9).
        """
        if self.edge == "circular":
            return self.frame_length + 2 * self.half_window
        return self.half_window

    @property
    def latency_cycles(self) -> int:
        """Cycles from a sample entering to its own output word leaving (non-circular policies).

        ``R + G`` cycles for the leading half of the window to arrive, plus
        ``pipeline_stages``. Under ``circular`` the whole frame is stored first;
        see ``docs/bit-true.md``.
        """
        if self.edge == "circular":
            return self.frame_length + 2 * self.half_window + self.pipeline_stages
        return self.half_window + self.pipeline_stages

    # ---- arithmetic helpers -------------------------------------------
    def threshold_from_statistic(self, s):
        """Threshold word(s) from the noise statistic(s): product, rounding, overflow.

        See ``docs/bit-true.md`` steps 5 and 6.
        """
        t = scale_product(s, self.alpha_int, self.drop_bits, self.rounding, self.truncate_partials)
        return apply_overflow(t, self.threshold_bits, self.overflow)

    def threshold_error_bound(self, s):
        """Bound on ``|T_fixed / 2**F_T - alpha * S / divisor|`` in input LSBs, where nothing saturates.

        Notes
        -----
        Two terms add: the constant's quantisation error scaled by the
        statistic, ``S * |A - A_exact| / 2**F_P``, and the rounding of the
        product, at most one threshold LSB ``2**-F_T`` for ``floor`` (the
        error lies in ``(-1, 0]`` LSB), half an LSB for ``half-up`` and
        ``half-even``, and one LSB per truncated partial product when
        ``truncate_partials`` is set. A tiny float allowance covers the
        double-precision evaluation of ``alpha``.
        """
        lsb = 2.0 ** -self.threshold_frac_bits
        if self.truncate_partials:
            r = len(self.alpha_digits) * lsb
        elif self.rounding == "floor":
            r = lsb
        else:
            r = 0.5 * lsb
        da = abs(self.alpha_int - self.alpha_target) / 2.0 ** self.product_frac_bits
        return s * da + r + 1e-9 * (1.0 + s)

    def to_dict(self, resolved: bool = False) -> dict:
        """The spec as plain TOML-able sections that :func:`spec_from_dict` reads back to an equal spec.

        Parameters
        ----------
        resolved : bool
            False: the alpha source as the spec gave it (``alpha`` or
            ``design_pfa``). True: always the resolved ``alpha``, so the
            constant is rebuilt without redoing the threshold design (what
            manifests and bench configurations record).
        """
        det = {
            "kind": self.kind,
            "ref_cells_per_side": self.ref_per_side,
            "guard_cells_per_side": self.guard_per_side,
            "compare": self.compare,
            "edge": self.edge,
        }
        if self.rank is not None:
            det["rank"] = self.rank
        # Exactly one of the two, so the dict loads again.
        if self.design_pfa is not None and not resolved:
            det["design_pfa"] = self.design_pfa
        else:
            det["alpha"] = self.alpha
        fixed = {k: getattr(self, k) for k in _FIXED_KEYS}
        stream = {k: getattr(self, k) for k in _STREAM_KEYS}
        return {"detector": det, "fixed": fixed, "stream": stream, **{k: dict(v) for k, v in self.sections.items()}}

    def derived(self) -> dict:
        """Derived widths and constants, for reports and manifests."""
        return {
            "window_length": self.window_length,
            "side_sum_bits": self.sum_bits,  # the width used (fixed.sum_bits, or its minimum by default)
            "statistic_bits": self.statistic_bits,
            "alpha_int": self.alpha_int,
            "alpha_bits": self.alpha_bits,
            "alpha_digits": len(self.alpha_digits),
            "mean_shift": self.mean_shift,
            "product_bits": self.product_bits,
            "drop_bits": self.drop_bits,
            "threshold_bits": self.threshold_bits,
            "realised_alpha": self.realised_alpha,
            "output_bits": self.output_bits,
            "latency_cycles": self.latency_cycles,
            "drain_cycles": self.drain_cycles,
        }


def spec_from_dict(data: Mapping[str, Any], source: str | None = None) -> BlockSpec:
    """Validate a spec mapping (the parsed TOML) and resolve its defaults.

    Raises
    ------
    SpecError
        Naming the first offending field (``section.key``) and its allowed values.
    """
    if isinstance(data, Mapping) and "map" in data:  # a range-Doppler block: refmodel/map_spec.py
        from .map_spec import map_spec_from_dict

        return map_spec_from_dict(data, source)
    known = ("detector", "fixed", "stream") + DOWNSTREAM_SECTIONS
    for name in data:
        require(name in known, name, "unknown section", choices(known))
    det = table(data, "detector", _DETECTOR_KEYS)
    fx = table(data, "fixed", _FIXED_KEYS)
    st = table(data, "stream", _STREAM_KEYS)

    kind = choice("detector.kind", det["kind"], KINDS)
    require(det["ref_cells_per_side"] is not None, "detector.ref_cells_per_side", "missing", "an integer >= 1")
    r = integer("detector.ref_cells_per_side", det["ref_cells_per_side"], 1, 4096)
    g = integer("detector.guard_cells_per_side", det["guard_cells_per_side"], 0, 4096)
    rank = det["rank"]
    if kind == "os":
        require(rank is not None, "detector.rank", "missing for kind \"os\"", f"an integer 1..{2 * r}")
        rank = integer("detector.rank", rank, 1, 2 * r)
    else:
        require(rank is None, "detector.rank", f"given for kind \"{kind}\"", "only with kind \"os\"")
    compare = choice("detector.compare", det["compare"], COMPARES)
    edge = choice("detector.edge", det["edge"], EDGES)

    alpha, pfa = det["alpha"], det["design_pfa"]
    require((alpha is None) != (pfa is None), "detector.alpha", "give exactly one of alpha and design_pfa",
            "alpha > 0 or design_pfa in (0, 1)")
    if pfa is not None:
        pfa = number("detector.design_pfa", pfa, 0.0, 1.0, open_lo=True, open_hi=True)
        from .threshold_design import alpha_from_pfa

        alpha = alpha_from_pfa(kind, 2 * r, pfa, rank)
    else:
        alpha = number("detector.alpha", alpha, 0.0, MAX_ALPHA, open_lo=True)
    require(alpha <= MAX_ALPHA, "detector.design_pfa", f"got {pfa!r}, which needs alpha = {alpha:.6g}",
            f"a design_pfa whose alpha is at most {MAX_ALPHA:g}")

    w_in = integer("fixed.input_bits", fx["input_bits"], 1, 32)
    side_bits = (r * ((1 << w_in) - 1)).bit_length()
    sum_bits = fx["sum_bits"]
    if sum_bits is None:
        sum_bits = side_bits
    else:
        sum_bits = integer("fixed.sum_bits", sum_bits, 1, 64)
        require(sum_bits >= side_bits, "fixed.sum_bits",
                f"got {sum_bits}, but one side's running sum reaches R*(2^input_bits-1) = "
                f"{r * ((1 << w_in) - 1)}, which needs {side_bits} bits (a narrower modular sum "
                f"loses the total for good)", f"an integer >= {side_bits}")
    f_a = integer("fixed.alpha_frac_bits", fx["alpha_frac_bits"], 0, 40)
    csd = integer("fixed.alpha_csd_digits", fx["alpha_csd_digits"], 0, 16)
    trunc = boolean("fixed.truncate_partials", fx["truncate_partials"])
    by_shift = boolean("fixed.mean_by_shift", fx["mean_by_shift"])
    f_t = integer("fixed.threshold_frac_bits", fx["threshold_frac_bits"], 0, 40)
    rounding = choice("fixed.rounding", fx["rounding"], ROUNDING_MODES)
    overflow = choice("fixed.overflow", fx["overflow"], OVERFLOW_MODES)
    require(not trunc or rounding == "floor", "fixed.rounding",
            f"got {rounding!r} with truncate_partials = true", '"floor" (truncated partial products floor each term)')
    if by_shift:
        div = {"ca": 2 * r, "go": r, "so": r}.get(kind)
        require(div is not None and div & (div - 1) == 0, "fixed.mean_by_shift",
                f"true, but the mean divisor is {div if div else 'not used by os'}",
                "true only when the divisor (2R for ca, R for go/so) is a power of two")
    frame = integer("stream.frame_length", st["frame_length"], 2 * r + 2 * g + 1, 1 << 24)
    stages = integer("stream.pipeline_stages", st["pipeline_stages"], 1, 16)

    sections = {}
    for name in DOWNSTREAM_SECTIONS:
        if name in data:
            require(isinstance(data[name], Mapping), name, f"got {type(data[name]).__name__}", "a table")
            sections[name] = dict(data[name])

    spec = BlockSpec(
        kind=kind, ref_per_side=r, guard_per_side=g, rank=rank, compare=compare, edge=edge,
        alpha=alpha, design_pfa=pfa, input_bits=w_in, sum_bits=sum_bits, alpha_frac_bits=f_a,
        alpha_csd_digits=csd, truncate_partials=trunc, mean_by_shift=by_shift,
        threshold_frac_bits=f_t, threshold_bits=1, rounding=rounding, overflow=overflow,
        frame_length=frame, pipeline_stages=stages, sections=MappingProxyType(sections), source=source,
    )
    require(spec.alpha_int >= 1, "fixed.alpha_frac_bits",
            f"got {f_a}: alpha * 2^F / divisor = {spec.alpha_target:.4g} quantises to 0",
            "more fraction bits (or a larger alpha)")
    require(f_t <= spec.product_frac_bits, "fixed.threshold_frac_bits", f"got {f_t}",
            f"an integer 0..{spec.product_frac_bits} (the product's fraction bits)")
    require(spec.product_bits <= MAX_PRODUCT_BITS, "fixed.alpha_frac_bits",
            f"product S*A would be {spec.product_bits} bits", f"a format whose product fits {MAX_PRODUCT_BITS} bits")
    # Automatic threshold width (docs/bit-true.md section 6): holds every threshold, so nothing saturates.
    auto_t = max(1, spec.threshold_max.bit_length())
    w_t = fx["threshold_bits"]
    w_t = auto_t if w_t is None else integer("fixed.threshold_bits", w_t, 1, 62)
    require(w_in + w_t + 3 <= MAX_WORD_BITS, "fixed.threshold_bits",
            f"output word would be input_bits + threshold_bits + 3 = {w_in + w_t + 3} bits",
            f"a threshold width with input_bits + threshold_bits + 3 <= {MAX_WORD_BITS}")
    return replace(spec, threshold_bits=w_t)


def refuse_dates(data: Mapping) -> None:
    """Refuse a TOML date, time or date-time anywhere in a spec: no field of any section takes one, and a
    section a command does not check (``[ports]`` for ``vectors``) is still copied into the manifest.

    Raises
    ------
    SpecError
        Naming the first such field (``section.key``, array items by index).
    """
    stack = [(str(k), v) for k, v in data.items()]
    while stack:  # an explicit stack: specs may nest deeper than the recursion limit
        where, value = stack.pop()
        if isinstance(value, (datetime.date, datetime.time)):  # datetime.datetime is a date
            raise SpecError(where, f"is a TOML {type(value).__name__} ({value.isoformat()})",
                            "a number, string, boolean, array or table")
        if isinstance(value, dict):
            stack.extend((f"{where}.{k}", v) for k, v in value.items())
        elif isinstance(value, list):
            stack.extend((f"{where}[{i}]", v) for i, v in enumerate(value))


def load_spec(path: str | Path) -> BlockSpec:
    """Read and validate a block-spec TOML file.

    Raises
    ------
    SpecError
        For a missing or unreadable file, a FIFO or device instead of a file,
        a file over :data:`refmodel.input_files.MAX_SPEC_BYTES` or not UTF-8,
        bad TOML (including values nested too deeply to parse), or any
        invalid field.
    """
    p = Path(path)
    allowed = f"a readable UTF-8 TOML file of at most {MAX_SPEC_BYTES} bytes"
    text = read_text(p, "SPEC", max_bytes=MAX_SPEC_BYTES, allowed=allowed)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SpecError("SPEC", f"{p.name} is not valid TOML ({exc})", "a TOML file") from None
    except RecursionError:
        raise SpecError("SPEC", f"{p.name} nests arrays or tables too deeply to read", "a TOML file") from None
    refuse_dates(data)
    try:
        return spec_from_dict(data, source=str(p))
    except RecursionError:  # a deeply nested value echoed in an error
        raise SpecError("SPEC", f"{p.name} nests arrays or tables too deeply to check", "a block spec") from None

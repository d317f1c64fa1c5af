"""Verilog parameters of the reference core for a block spec.

The reference core ``hdl_tb/rtl/cfar_stream.v`` implements
``docs/bit-true.md`` for every detector kind (CA, GO, SO, OS) under every
edge policy (``skip``, ``zero-pad``, ``one-sided``, ``circular``).
:func:`core_parameters` maps a :class:`~refmodel.block_spec.BlockSpec` to the
core's parameter values (plain ints, ready for ``iverilog -P``, a cocotb
runner's ``parameters=`` or Yosys ``chparam``) and refuses, with a
:class:`~refmodel.errors.SpecError`, what the core cannot be built with. The
field-by-field description of the core is ``docs/reference-core.md``.

A map (range-Doppler) block spec is realised by the map core
``hdl_tb/rtl/cfar_map.v`` instead (``docs/reference-core-2d.md``):
:func:`core_parameters` hands it to :func:`map_core_parameters`, and
:func:`core_files` names the core, its sources and its bench for either kind.
"""

from __future__ import annotations

from pathlib import Path

from refmodel.block_spec import BlockSpec
from refmodel.errors import SpecError
from refmodel.fixedpoint.pipeline_struct import MAX_CIRCULAR_FRAME
from refmodel.spec_fields import integer

#: Name of the core's top module.
CORE_TOP = "cfar_stream"
#: Name of the pure-Verilog testbench's top module.
BENCH_TOP = "cfar_stream_tb"
#: Folder holding the Verilog sources.
RTL_DIR = Path(__file__).resolve().parent / "rtl"
#: The core's source files, for simulators and synthesis.
CORE_SOURCES = (RTL_DIR / "cfar_stream.v",)
#: The testbench source.
BENCH_SOURCE = RTL_DIR / "cfar_stream_tb.v"

#: Fewest register stages the core can be built with (the output register alone).
MIN_PIPELINE_STAGES = 1

#: Integer codes of the enumerated parameters.
KIND_CODES = {"ca": 0, "go": 1, "so": 2, "os": 3}
EDGE_CODES = {"skip": 0, "zero-pad": 1, "one-sided": 2, "circular": 3}
ROUNDING_CODES = {"floor": 0, "half-up": 1, "half-even": 2}
OVERFLOW_CODES = {"saturate": 0, "wrap": 1}
COMPARE_CODES = {">": 0, ">=": 1}


def longest_frame(spec: BlockSpec) -> int:
    """The longest frame the spec's vector set can hold: the circular frame store depth.

    Parameters
    ----------
    spec : BlockSpec
        A validated block spec (its ``[vectors]`` section sets the random
        frame lengths).

    Returns
    -------
    int
        The largest of ``stream.frame_length + 1`` and ``2W + 3`` (the
        directed corner cases of :mod:`vectors.corner_cases`, ``W`` the window
        length) and ``vectors.random_length_max`` (the random frames).
    """
    from vectors.vector_set import vector_settings

    w = spec.window_length
    return max(spec.frame_length + 1, 2 * w + 3, vector_settings(spec).random_length_max)


def core_parameters(spec: BlockSpec, *, srst_level: int = 1, reference_core: bool = True,
                    max_frame_length: int | None = None) -> dict[str, int]:
    """The ``cfar_stream`` parameter values that realise ``spec``.

    Parameters
    ----------
    spec : BlockSpec
        A validated block spec.
    srst_level : {1, 0}, optional
        Level of the core's synchronous reset input that resets it (1 =
        active high). Not part of the block spec; the default is active high.
    reference_core : bool, optional
        True: also check what only the reference core needs
        (``stream.pipeline_stages`` >= :data:`MIN_PIPELINE_STAGES`). False:
        the same parameters for a user's own core.
    max_frame_length : int, optional
        Depth of the circular frame store (``MAX_FRAME_LENGTH``, used under
        ``edge = "circular"``): the longest frame the core will see. Default
        :func:`longest_frame` (every frame of the spec's vector set fits).

    Returns
    -------
    dict of str to int
        One entry per core parameter: ``INPUT_BITS``, ``REF_CELLS``,
        ``GUARD_CELLS``, ``KIND``, ``OS_RANK``, ``EDGE``,
        ``MAX_FRAME_LENGTH``, ``SUM_BITS``, ``ALPHA_INT``, ``DROP_BITS``,
        ``THRESHOLD_FRAC_BITS``, ``THRESHOLD_BITS``, ``ROUNDING``,
        ``OVERFLOW``, ``COMPARE_GE``, ``TRUNCATE_PARTIALS``,
        ``PIPELINE_STAGES``, ``SRST_LEVEL``. ``OS_RANK`` is
        ``detector.rank`` (1 for the other kinds, where the core ignores it).

    Raises
    ------
    SpecError
        ``stream.pipeline_stages`` below :data:`MIN_PIPELINE_STAGES` (reference
        core), ``srst_level`` other than 0 or 1, ``max_frame_length`` outside
        ``2R+2G+1 .. 2**24``.

    Notes
    -----
    ``fixed.mean_by_shift`` needs no parameter of its own: it only changes the
    constant ``A`` and the dropped bits ``d`` (``docs/bit-true.md`` section
    4), both passed as integers. ``ALPHA_INT`` is ``spec.alpha_int``, the
    authoritative integer of the manifest.
    """
    if is_map_spec(spec):
        return map_core_parameters(spec, srst_level=srst_level, reference_core=reference_core)
    if max_frame_length is None:
        max_frame_length = longest_frame(spec) if spec.edge == "circular" else spec.frame_length
    max_frame_length = integer("max_frame_length", max_frame_length, spec.window_length, MAX_CIRCULAR_FRAME)
    if reference_core and spec.pipeline_stages < MIN_PIPELINE_STAGES:
        raise SpecError("stream.pipeline_stages", f"got {spec.pipeline_stages}",
                        f"an integer >= {MIN_PIPELINE_STAGES} for the reference core")
    if srst_level not in (0, 1) or isinstance(srst_level, bool):
        raise SpecError("srst_level", f"got {srst_level!r}", "0 (active low) or 1 (active high)")
    return {
        "INPUT_BITS": spec.input_bits,
        "REF_CELLS": spec.ref_per_side,
        "GUARD_CELLS": spec.guard_per_side,
        "KIND": KIND_CODES[spec.kind],
        "OS_RANK": spec.rank if spec.kind == "os" else 1,
        "EDGE": EDGE_CODES[spec.edge],
        "MAX_FRAME_LENGTH": max_frame_length,
        "SUM_BITS": spec.sum_bits,
        "ALPHA_INT": int(spec.alpha_int),
        "DROP_BITS": spec.drop_bits,
        "THRESHOLD_FRAC_BITS": spec.threshold_frac_bits,
        "THRESHOLD_BITS": spec.threshold_bits,
        "ROUNDING": ROUNDING_CODES[spec.rounding],
        "OVERFLOW": OVERFLOW_CODES[spec.overflow],
        "COMPARE_GE": COMPARE_CODES[spec.compare],
        "TRUNCATE_PARTIALS": int(spec.truncate_partials),
        "PIPELINE_STAGES": spec.pipeline_stages,
        "SRST_LEVEL": int(srst_level),
    }


def core_latency_cycles(spec: BlockSpec) -> int:
    """Input-to-output latency of the core at full rate, for a frame of ``stream.frame_length``.

    ``R + G + pipeline_stages`` cycles; under ``circular``
    ``L + 2(R + G) + pipeline_stages`` (the frame is stored whole first,
    ``docs/bit-true.md`` section 9): :attr:`BlockSpec.latency_cycles`.

    Raises
    ------
    SpecError
        As :func:`core_parameters`, for a spec the core cannot be built with.
    """
    if is_map_spec(spec):
        return map_core_latency_cycles(spec)
    core_parameters(spec)
    return spec.latency_cycles


# ---- map (range-Doppler) blocks: the core hdl_tb/rtl/cfar_map.v -------------------------------------

#: Name of the map core's top module.
MAP_CORE_TOP = "cfar_map"
#: Name of the map core's pure-Verilog testbench.
MAP_BENCH_TOP = "cfar_map_tb"
#: The map core's source files.
MAP_CORE_SOURCES = (RTL_DIR / "cfar_map.v",)
#: The map core's testbench source.
MAP_BENCH_SOURCE = RTL_DIR / "cfar_map_tb.v"
#: Fewest register stages of the map core (the sums, then the output register).
MAP_MIN_PIPELINE_STAGES = 2
#: Integer codes of the map core's enumerated parameters.
ORDER_CODES = {"doppler-fast": 0, "range-fast": 1}
WINDOW_CODES = {"ring": 0, "cross": 1}


def is_map_spec(spec) -> bool:
    """True for a map (range-Doppler) block spec, which the map core ``cfar_map`` realises."""
    return bool(getattr(type(spec), "is_map", False))


def core_files(spec) -> dict:
    """The reference core of ``spec``: ``top``, ``sources``, ``bench_top``, ``bench_source``.

    ``cfar_map`` for a map block, ``cfar_stream`` for a 1D block.
    """
    if is_map_spec(spec):
        return {"top": MAP_CORE_TOP, "sources": MAP_CORE_SOURCES, "bench_top": MAP_BENCH_TOP,
                "bench_source": MAP_BENCH_SOURCE}
    return {"top": CORE_TOP, "sources": CORE_SOURCES, "bench_top": BENCH_TOP, "bench_source": BENCH_SOURCE}


def map_core_parameters(spec, *, srst_level: int = 1, reference_core: bool = True) -> dict[str, int]:
    """The ``cfar_map`` parameter values that realise a map block spec.

    Parameters
    ----------
    spec : refmodel.map_spec.MapSpec
        A validated map block spec.
    srst_level : {1, 0}, optional
        Level of the synchronous reset that resets the core (1 = active high).
    reference_core : bool, optional
        True: also refuse what only the reference core cannot do (``detector.kind = "os"``,
        ``stream.pipeline_stages`` below :data:`MAP_MIN_PIPELINE_STAGES`). False: the same
        parameters for a user's own map core.

    Returns
    -------
    dict of str to int
        ``INPUT_BITS``, ``RANGE_CELLS``, ``DOPPLER_BINS``, ``ORDER``, ``WINDOW``, ``REF_RANGE``,
        ``REF_DOPPLER``, ``GUARD_RANGE``, ``GUARD_DOPPLER``, ``KIND``, ``RANGE_EDGE``,
        ``DOPPLER_EDGE``, ``SUM_BITS``, ``ALPHA_INT``, ``DROP_BITS``, ``THRESHOLD_FRAC_BITS``,
        ``THRESHOLD_BITS``, ``ROUNDING``, ``OVERFLOW``, ``COMPARE_GE``, ``TRUNCATE_PARTIALS``,
        ``PIPELINE_STAGES``, ``SRST_LEVEL`` (a user's own map core that needs an OS rank
        gets it through ``[ports.parameters]``).

    Raises
    ------
    SpecError
        ``detector.kind`` = ``"os"`` or ``stream.pipeline_stages`` < 2 for the reference core, a bad
        ``srst_level``.

    Notes
    -----
    ``SUM_BITS`` is :attr:`MapSpec.sum_bits`, the width of the part's largest true sum
    (``docs/bit-true-2d.md`` section 3); every register of the sums is kept at that width.
    """
    if reference_core and spec.kind == "os":
        raise SpecError("detector.kind", "'os' on a map block: the map reference core has no order statistic",
                        "'ca', 'go' or 'so' for the map reference core (or your own core through [ports])")
    if reference_core and spec.pipeline_stages < MAP_MIN_PIPELINE_STAGES:
        raise SpecError("stream.pipeline_stages", f"got {spec.pipeline_stages}",
                        f"an integer >= {MAP_MIN_PIPELINE_STAGES} for the map reference core")
    if srst_level not in (0, 1) or isinstance(srst_level, bool):
        raise SpecError("srst_level", f"got {srst_level!r}", "0 (active low) or 1 (active high)")
    w = spec.window
    params = {
        "INPUT_BITS": spec.input_bits,
        "RANGE_CELLS": spec.range_cells,
        "DOPPLER_BINS": spec.doppler_bins,
        "ORDER": ORDER_CODES[spec.order],
        "WINDOW": WINDOW_CODES[w.shape],
        "REF_RANGE": w.ref_range,
        "REF_DOPPLER": w.ref_doppler,
        "GUARD_RANGE": w.guard_range,
        "GUARD_DOPPLER": w.guard_doppler,
        "KIND": KIND_CODES[spec.kind],
        "RANGE_EDGE": EDGE_CODES[spec.range_edge],
        "DOPPLER_EDGE": EDGE_CODES[spec.doppler_edge],
        "SUM_BITS": max(1, spec.sum_bits),
        "ALPHA_INT": int(spec.alpha_int),
        "DROP_BITS": spec.drop_bits,
        "THRESHOLD_FRAC_BITS": spec.threshold_frac_bits,
        "THRESHOLD_BITS": spec.threshold_bits,
        "ROUNDING": ROUNDING_CODES[spec.rounding],
        "OVERFLOW": OVERFLOW_CODES[spec.overflow],
        "COMPARE_GE": COMPARE_CODES[spec.compare],
        "TRUNCATE_PARTIALS": int(spec.truncate_partials),
        "PIPELINE_STAGES": spec.pipeline_stages,
        "SRST_LEVEL": int(srst_level),
    }
    return params


def map_core_latency_cycles(spec) -> int:
    """Cycles from a cell's input transfer to its word's output transfer at full rate, neither axis
    circular: ``H_s P_f + H_f + pipeline_stages`` (:attr:`MapSpec.window_delay` plus the stages).

    Raises
    ------
    SpecError
        As :func:`map_core_parameters`; ``map.range_edge`` / ``map.doppler_edge`` circular (the store
        makes the latency depend on the position in the map, ``docs/reference-core-2d.md``).
    """
    map_core_parameters(spec)
    for name in ("range_edge", "doppler_edge"):
        if getattr(spec, name) == "circular":
            raise SpecError(f"map.{name}", "'circular': the latency varies with the position in the map",
                            "'skip' or 'zero-pad' on both axes for a fixed latency")
    return spec.window_delay + spec.pipeline_stages

"""Verilog parameters of the reference core for a block spec.

The reference core ``hdl_tb/rtl/cfar_stream.v`` implements
``docs/bit-true.md`` for the CA, GO and SO detectors under the ``skip``,
``zero-pad`` and ``one-sided`` edge policies. :func:`core_parameters` maps a
:class:`~refmodel.block_spec.BlockSpec` to the core's parameter values (plain
ints, ready for ``iverilog -P``, a cocotb runner's ``parameters=`` or Yosys
``chparam``) and refuses, with a :class:`~refmodel.errors.SpecError`, what the
core does not implement. The field-by-field description of the core is
``docs/reference-core.md``.
"""

from __future__ import annotations

from pathlib import Path

from refmodel.block_spec import BlockSpec
from refmodel.errors import SpecError

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

#: Integer codes of the enumerated parameters. Code 3 (os, circular) is passed
#: only to a user's own core; the reference core stops elaboration on it.
KIND_CODES = {"ca": 0, "go": 1, "so": 2, "os": 3}
EDGE_CODES = {"skip": 0, "zero-pad": 1, "one-sided": 2, "circular": 3}
#: What the reference core implements.
REFERENCE_KINDS = ("ca", "go", "so")
REFERENCE_EDGES = ("skip", "zero-pad", "one-sided")
ROUNDING_CODES = {"floor": 0, "half-up": 1, "half-even": 2}
OVERFLOW_CODES = {"saturate": 0, "wrap": 1}
COMPARE_CODES = {">": 0, ">=": 1}


def core_parameters(spec: BlockSpec, *, srst_level: int = 1, reference_core: bool = True) -> dict[str, int]:
    """The ``cfar_stream`` parameter values that realise ``spec``.

    Parameters
    ----------
    spec : BlockSpec
        A validated block spec.
    srst_level : {1, 0}, optional
        Level of the core's synchronous reset input that resets it (1 =
        active high). Not part of the block spec; the default is active high.
    reference_core : bool, optional
        True: refuse what the reference core does not implement. False: the
        same parameters for a user's own core, ``os`` and ``circular`` included
        (code 3).

    Returns
    -------
    dict of str to int
        One entry per core parameter: ``INPUT_BITS``, ``REF_CELLS``,
        ``GUARD_CELLS``, ``KIND``, ``EDGE``, ``SUM_BITS``, ``ALPHA_INT``,
        ``DROP_BITS``, ``THRESHOLD_FRAC_BITS``, ``THRESHOLD_BITS``,
        ``ROUNDING``, ``OVERFLOW``, ``COMPARE_GE``, ``TRUNCATE_PARTIALS``,
        ``PIPELINE_STAGES``, ``SRST_LEVEL``.

    Raises
    ------
    SpecError
        ``detector.kind`` for ``"os"`` and ``detector.edge`` for
        ``"circular"`` (not implemented by the core),
        ``stream.pipeline_stages`` below :data:`MIN_PIPELINE_STAGES`, and
        ``srst_level`` other than 0 or 1.

    Notes
    -----
    ``fixed.mean_by_shift`` needs no parameter of its own: it only changes the
    constant ``A`` and the dropped bits ``d`` (``docs/bit-true.md`` section
    4), both passed as integers. ``ALPHA_INT`` is ``spec.alpha_int``, the
    authoritative integer of the manifest.
    """
    if reference_core and spec.kind not in REFERENCE_KINDS:
        raise SpecError("detector.kind", f"got {spec.kind!r}: the reference core has no order-statistic (os) "
                        "datapath", ", ".join(f'"{k}"' for k in REFERENCE_KINDS))
    if reference_core and spec.edge not in REFERENCE_EDGES:
        raise SpecError("detector.edge", f"got {spec.edge!r}: the reference core has no frame store for the "
                        "circular policy", ", ".join(f'"{k}"' for k in REFERENCE_EDGES))
    if spec.pipeline_stages < MIN_PIPELINE_STAGES:
        raise SpecError("stream.pipeline_stages", f"got {spec.pipeline_stages}",
                        f"an integer >= {MIN_PIPELINE_STAGES} for the reference core")
    if srst_level not in (0, 1) or isinstance(srst_level, bool):
        raise SpecError("srst_level", f"got {srst_level!r}", "0 (active low) or 1 (active high)")
    return {
        "INPUT_BITS": spec.input_bits,
        "REF_CELLS": spec.ref_per_side,
        "GUARD_CELLS": spec.guard_per_side,
        "KIND": KIND_CODES[spec.kind],
        "EDGE": EDGE_CODES[spec.edge],
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
    """Input-to-output latency of the core at full rate: ``R + G + pipeline_stages`` cycles.

    Raises
    ------
    SpecError
        As :func:`core_parameters`, for a spec the core does not implement.
    """
    core_parameters(spec)
    return spec.half_window + spec.pipeline_stages

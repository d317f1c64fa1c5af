"""``cfarvec synth``: Yosys cell counts of the reference core (or of your RTL) built for a block spec.

The work is done by :func:`hdl_tb.synthesis.synthesize`. Exit codes: 0 with
the counts printed, 1 when Yosys fails on the core, 2 for bad input (a bad
spec, Yosys not installed).
"""

from __future__ import annotations

import argparse
import json
import sys

from hdl_tb.port_map import check_against_rtl, port_map_from_spec
from hdl_tb.synthesis import FLOWS, SynthesisError, synthesize
from hdl_tb.tb_generator import bench_parameters, module_parameters, resolve_rtl
from refmodel.block_spec import load_spec

_DESCRIPTION = """\
Synthesise the reference Verilog core (hdl_tb/rtl/cfar_stream.v) with the
parameters of SPEC using Yosys, flattened and out of context, and print its
cell counts: LUTs, flip-flops, DSP blocks, carry cells, shift-register LUTs
(SRLs), simple gates and the total. Flows: generic (Yosys 'synth': simple
gates and flip-flops, no LUTs), ice40 (iCE40 LUT4s, carries, flip-flops, block
RAM) and xilinx (7-series primitives); --json adds block RAMs, LUT RAMs and
memory bits. A netlist
with latches is refused. Exit status 0: counts printed; 1: Yosys failed;
2: bad input (a bad spec, Yosys not installed). With --rtl
your module is synthesised instead (top module: --top or ports.module of
SPEC), with the parameters the testbenches give it (the [ports] table:
core_parameters and [ports.parameters]). A map (range-Doppler) spec
synthesises the map core hdl_tb/rtl/cfar_map.v; its table adds the
memory the core holds (line buffers and input store, from the spec) and
the RAM primitives Yosys mapped it to (block RAMs with their capacity,
LUT RAMs)."""

#: Rows of the text table: (label, SynthReport.summary() key); "other" is what no class counts
#: (for example inverters and wide multiplexers of the xilinx flow).
ROWS = (("LUTs", "luts"), ("flip-flops", "flip_flops"), ("DSP blocks", "dsps"), ("carries", "carries"),
        ("SRLs", "srls"), ("block RAMs", "brams"), ("LUT RAMs", "lutrams"), ("simple gates", "gates"),
        ("other", "other"), ("total cells", "cells"))


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``synth`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser("synth", help="Yosys cell counts of the reference core for a spec",
                              description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("spec", metavar="SPEC", help="block spec (TOML)")
    p.add_argument("--flow", choices=tuple(FLOWS), default="generic", help="Yosys flow (default generic)")
    p.add_argument("--rtl", nargs="+", metavar="FILE", default=[],
                   help="your RTL files (default: the reference core cfar_stream; cfar_map for a map spec)")
    p.add_argument("--top", metavar="NAME", help="top module of the RTL (overrides ports.module)")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    p.set_defaults(func=run)
    return p


def format_table(spec_name: str, counts: dict, top: str = "cfar_stream") -> str:
    """The counts as a small text table.

    Parameters
    ----------
    spec_name : str
        What to call the spec in the heading.
    counts : dict
        :meth:`hdl_tb.synthesis.SynthReport.summary` of the run.
    """
    other = counts["cells"] - sum(counts[key] for _, key in ROWS[:-2])
    lines = [f"{top} for {spec_name}, Yosys flow {counts['flow']}"]
    lines += [f"  {label:<13}{other if key == 'other' else counts[key]:>8}" for label, key in ROWS]
    lines.append(f"  {'RAM bits':<13}{counts['memory_bits']:>8}  (capacity of the block and LUT RAMs)")
    return "\n".join(lines)


def map_memory(spec) -> dict:
    """The memory the map core holds (``design_memory_bits``): line buffers, input store and the column
    sums of the line before, one word of W_S bits per padded-line cell and rectangle
    (``docs/reference-core-2d.md``, Memory). What Yosys mapped it to is in the counts (``brams``, ``lutrams``
    and their capacity ``memory_bits``, :func:`hdl_tb.synthesis.classify`)."""
    rects = sum(len(spec.stream_boxes(part)) for part in spec.parts)
    column_sums = rects * spec.padded_line * spec.sum_bits
    return {"design_memory_bits": int(spec.line_buffer_bits + spec.store_bits + column_sums)}


def run(args: argparse.Namespace) -> int:
    """Synthesise and print the counts; 0 on success, 1 when Yosys fails."""
    from hdl_tb.core_params import MAP_CORE_SOURCES, MAP_CORE_TOP, core_parameters, is_map_spec

    spec = load_spec(args.spec)
    extra = {}
    if args.rtl:
        pm = port_map_from_spec(spec, top=args.top)
        files = resolve_rtl(args.rtl)
        target = module_parameters(pm, bench_parameters(spec))
        # The module, its ports and parameters first, with a one-line error naming --top or ports.<field>.
        check_against_rtl(pm, files, parameters=target, input_bits=spec.input_bits,
                          module_field="--top" if args.top is not None else "ports.module")
        extra = {"sources": files, "top": pm.module}
    elif is_map_spec(spec):
        # The map core: its parameters (refusing, with the field, what it cannot build) and its source.
        target = core_parameters(spec)
        extra = {"sources": MAP_CORE_SOURCES, "top": MAP_CORE_TOP}
    else:
        target = spec
    try:
        report = synthesize(target, args.flow, **extra)
    except SynthesisError as exc:
        print(f"cfarvec synth: error: {str(exc).splitlines()[0]}", file=sys.stderr)
        return 1
    counts = report.summary()
    memory = map_memory(spec) if is_map_spec(spec) and not args.rtl else {}
    if args.json:
        print(json.dumps({"spec": args.spec, "top": report.top, **counts, **memory, "cell_types": report.cells}))
    else:
        print(format_table(args.spec, counts, report.top))
        if memory:
            print(f"  {'memory held':<13}{memory['design_memory_bits']:>8}  bits (line buffers, input store, "
                  "column sums)")
    return 0

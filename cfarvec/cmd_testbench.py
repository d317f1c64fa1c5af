"""``cfarvec testbench``: write a self-contained co-simulation testbench folder.

The work is done by :func:`hdl_tb.tb_generator.write_testbench`; this module
parses the options and prints a short summary. The folder layout and the
``[ports]`` table are described in ``docs/testbench.md``.
"""

from __future__ import annotations

import argparse

from hdl_tb.simulators import DEFAULT_SIMULATOR, SIMULATORS
from hdl_tb.tb_generator import DEFAULT_GAP_PERCENT, DEFAULT_STALL_PERCENT, write_testbench
from refmodel.block_spec import load_spec

_DESCRIPTION = """\
Write a folder that checks a streaming CFAR module against the project's
bit-accurate model on Icarus Verilog: the golden vector set, a copy of the
RTL (the reference core cfar_stream, or cfar_map for a map spec, unless
--rtl is given), a cocotb test module with two benches (bulk: a Verilog driver streams the vector file and
Python compares at the end; interactive: Python feeds frame batches to that
driver and checks each output frame as it arrives), its pytest runner, the pure-Verilog
self-checking testbench with a Makefile, and a README. The [ports] table of
SPEC maps the benches onto your module's port names, reset level and output
word layout; it is checked against the RTL with Icarus Verilog when present.
For VHDL-2008 RTL (--rtl *.vhd, --simulator ghdl) the folder holds a
VHDL-2008 driver and a pure-VHDL bench instead, and GHDL checks the map.
DIR is written beside itself and renamed into place only when complete."""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``testbench`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser("testbench", help="write a cocotb + pure-Verilog co-simulation testbench folder",
                              description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter)
    add_bench_options(p)
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="folder to create")
    p.add_argument("--force", action="store_true", help="replace DIR if it exists and is not empty")
    p.add_argument("--simulator", choices=SIMULATORS, default=DEFAULT_SIMULATOR,
                   help=f"default simulator of the folder's Makefile and pytest runner (default {DEFAULT_SIMULATOR})")
    p.set_defaults(func=run)
    return p


def add_bench_options(p: argparse.ArgumentParser) -> None:
    """Options shared by ``testbench`` and ``cosim``: spec, RTL, top, samples, seed, gaps, stalls."""
    p.add_argument("spec", metavar="SPEC", help="block spec (TOML)")
    p.add_argument("--rtl", nargs="+", metavar="FILE", default=[],
                   help="your RTL files (default: the reference core cfar_stream; cfar_map for a map spec)")
    p.add_argument("--top", metavar="NAME", help="top module of the RTL (overrides ports.module)")
    p.add_argument("--samples", type=int, metavar="N",
                   help="samples to stream, rounded up to a whole frame (default: the whole vector set)")
    p.add_argument("--seed", type=int, metavar="N", help="seed of the vectors, gaps and backpressure")
    p.add_argument("--gaps", type=int, default=DEFAULT_GAP_PERCENT, metavar="PCT",
                   help=f"percent of cycles with no input offered, 0..95 (default {DEFAULT_GAP_PERCENT})")
    p.add_argument("--stalls", type=int, default=DEFAULT_STALL_PERCENT, metavar="PCT",
                   help=f"percent of cycles with the output not ready, 0..95 (default {DEFAULT_STALL_PERCENT})")


def run(args: argparse.Namespace) -> int:
    """Write the folder and print what is in it."""
    spec = load_spec(args.spec)
    bench = write_testbench(spec, args.output, rtl=args.rtl, top=args.top, force=args.force, seed=args.seed,
                            samples=args.samples, gap_percent=args.gaps, stall_percent=args.stalls,
                            simulator=args.simulator)
    c = bench.config
    print(f"wrote {args.output}: {c['port_map']['module']}, {c['words']} of {c['total_words']} samples, "
          f"{c['gap_percent']}% gaps, {c['stall_percent']}% stalls, seed {c['seed']}")
    vhdl = c.get("language") == "vhdl"
    if not bench.ports_checked:
        print(f"note: {'ghdl' if vhdl else 'iverilog'} not found, the port map was not checked against the RTL")
    if vhdl:
        print(f"run: make -C {args.output} vhdl | bulk | interactive   (or python -m pytest in {args.output})")
    else:
        print(f"run: make -C {args.output} verilog | bulk | interactive [SIMULATOR=icarus|verilator]   "
              f"(or python -m pytest in {args.output})")
    return 0

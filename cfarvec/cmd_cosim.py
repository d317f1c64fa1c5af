"""``cfarvec cosim``: generate a testbench, build it, run it on Icarus Verilog or Verilator, print a summary.

The work is done by :func:`hdl_tb.cosim.cosim`. Exit codes: 0 when every
word matches, 1 on a mismatch (or a handshake error, missing or extra words,
a timeout), 2 for bad input (bad spec or port map, missing simulator, RTL
that does not compile, a port the module lacks).
"""

from __future__ import annotations

import argparse
import json

from hdl_tb.cosim import cosim, format_summary, summary_dict
from hdl_tb.simulators import DEFAULT_SIMULATOR, SIMULATORS
from hdl_tb.tb_generator import DEFAULT_SINK, MODES, SINK_MODES
from refmodel.block_spec import load_spec

from .cmd_testbench import add_bench_options

_DESCRIPTION = """\
Co-simulate a CFAR module against the project's bit-accurate model: write a
testbench folder (see 'cfarvec testbench'), build it for Icarus Verilog or
Verilator (--simulator), run one bench and print a one-screen summary (words
compared, mismatches, simulation speed). A failing run also prints the first
mismatches in a table (vector source and directed case, frame and cell, every
field expected/received, the noise statistic and reference-cell sum the
model saw), the mismatches per field, the simple bugs (shifted output, window
off by one cell, rounding at ties, saturation boundary, > vs >=) that explain
the received words, and a command that reruns just the failing frames; its
folder is kept. Modes: bulk (cocotb, a Verilog driver streams the vector file; the
fastest), interactive (cocotb, Python feeds frame batches and checks each output frame),
verilog (the pure-Verilog self-checking bench, no Python). VHDL-2008 RTL
(--rtl *.vhd) runs on GHDL (--simulator ghdl) in the modes bulk, interactive
and vhdl (the pure-VHDL self-checking bench). --sink
waits-for-valid makes the output sink raise TREADY only after it has seen
TVALID high (ARM IHI 0051A 2.2.1 allows a sink to wait), so a module whose
TVALID waits for TREADY deadlocks and fails. Exit status 0: pass; 1:
mismatch; 2: bad input."""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``cosim`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser("cosim", help="co-simulate RTL against the bit-accurate model (generate, build, run)",
                              description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter)
    add_bench_options(p)
    p.add_argument("--mode", choices=MODES, default="bulk", help="which bench to run (default bulk)")
    p.add_argument("--sink", choices=SINK_MODES, default=DEFAULT_SINK,
                   help="output sink: independent raises TREADY without looking at TVALID, waits-for-valid only "
                        f"after seeing TVALID high (default {DEFAULT_SINK})")
    p.add_argument("--simulator", choices=SIMULATORS, default=DEFAULT_SIMULATOR,
                   help=f"simulator (default {DEFAULT_SIMULATOR})")
    p.add_argument("--frames", metavar="LIST", help="stream only these frames of the vector set, e.g. 3,17,40 "
                   "(a rerun of the failing frames)")
    p.add_argument("--waves", action="store_true", help="write a waveform (the folder is then kept)")
    p.add_argument("--keep", metavar="DIR", help="write the testbench folder here and keep it")
    p.add_argument("--force", action="store_true", help="replace the --keep folder if it is not empty")
    p.add_argument("--json", action="store_true", help="print the run's summary JSON instead of the text")
    p.set_defaults(func=run)
    return p


def run(args: argparse.Namespace) -> int:
    """Run the co-simulation; print the summary; 0 on a pass, 1 on a mismatch."""
    spec = load_spec(args.spec)
    result = cosim(spec, rtl=args.rtl, top=args.top, mode=args.mode, samples=args.samples, seed=args.seed,
                   gap_percent=args.gaps, stall_percent=args.stalls, sink=args.sink, waves=args.waves,
                   folder=args.keep, force=args.force, simulator=args.simulator, frames=args.frames)
    print(json.dumps(summary_dict(result), sort_keys=True) if args.json else format_summary(result))
    return 0 if result.passed else 1

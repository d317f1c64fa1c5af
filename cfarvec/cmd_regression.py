"""``cfarvec regression``: many co-simulation runs in one command, one JUnit file, a summary table.

The work is done by :mod:`hdl_tb.regression`. Exit codes: 0 when every run
passed, 1 when any run failed or had bad input, 2 for bad input to the
command itself (a bad plan file, option or spec path).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from hdl_tb.regression import format_table, load_plan, make_plan, run_plan, write_junit
from hdl_tb.simulators import DEFAULT_SIMULATOR
from hdl_tb.tb_generator import DEFAULT_GAP_PERCENT, DEFAULT_SINK, DEFAULT_STALL_PERCENT, SINK_MODES
from refmodel.output_folder import check_target

_DESCRIPTION = """\
Run every combination of block specs x seeds x simulators x modes as
'cfarvec cosim' runs, JOBS at a time, each in its own folder under DIR
(kept when the run fails, with its mismatch report), and write one JUnit
XML file with one test case per run, named <mode>[<simulator>,seed=<seed>]
in class cfarvec.<spec name>. Prints a summary table and, for every
failing run, the cfarvec cosim command that repeats it. Every run of a
spec on one simulator shares one build (in DIR/builds): seeds are run-time
inputs, so each spec is built once per simulator and bench. The plan comes
from the command line or from a small TOML file (--plan; command-line
values override it). Lists are comma-separated (1,2,3) and seeds may be a range
(1:3). Exit status 0: every run passed; 1: a run failed; 2: bad input."""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``regression`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser("regression",
                              description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("specs", nargs="*", metavar="SPEC", help="block specs (TOML)")
    p.add_argument("--plan", metavar="FILE", help="a TOML plan: specs, seeds, simulators, modes, samples, ...")
    p.add_argument("--seeds", metavar="LIST", help="seeds, e.g. 1,2,3 or 1:3 (default 1)")
    p.add_argument("--simulators", metavar="LIST", help=f"icarus, verilator and/or ghdl (VHDL RTL) (default {DEFAULT_SIMULATOR})")
    p.add_argument("--modes", metavar="LIST", help="bulk, interactive, verilog and/or vhdl (VHDL RTL) (default bulk)")
    p.add_argument("--samples", type=int, metavar="N", help="samples per run, rounded up to whole frames")
    p.add_argument("--gaps", type=int, metavar="PCT", help=f"input gaps, percent (default {DEFAULT_GAP_PERCENT})")
    p.add_argument("--stalls", type=int, metavar="PCT",
                   help=f"output backpressure, percent (default {DEFAULT_STALL_PERCENT})")
    p.add_argument("--sink", choices=SINK_MODES, help=f"output sink (default {DEFAULT_SINK})")
    p.add_argument("--rtl", nargs="+", metavar="FILE", help="your RTL files (default: the reference core)")
    p.add_argument("--top", metavar="NAME", help="top module of the RTL")
    p.add_argument("-j", "--jobs", type=int, metavar="N", help="runs at a time (default 1)")
    p.add_argument("-o", "--output", default="cfarvec-regression", metavar="DIR",
                   help="folder for the runs and the JUnit file (default cfarvec-regression)")
    p.add_argument("--force", action="store_true", help="use DIR even if it is not empty")
    p.add_argument("--junit", metavar="FILE", help="JUnit XML file (default DIR/junit.xml)")
    p.add_argument("--keep-passing", action="store_true", help="keep the folders of passing runs too (and the shared builds)")
    p.add_argument("--json", action="store_true", help="print one JSON object per run instead of the table")
    p.set_defaults(func=run)
    return p


def run(args: argparse.Namespace) -> int:
    """Run the plan; print the table; 0 when every run passed, else 1."""
    cli = {"seeds": args.seeds, "simulators": args.simulators, "modes": args.modes, "samples": args.samples,
           "gaps": args.gaps, "stalls": args.stalls, "sink": args.sink, "rtl": args.rtl, "top": args.top,
           "jobs": args.jobs}
    given = {k: v for k, v in cli.items() if v is not None}
    if args.plan:
        plan = load_plan(args.plan)
        specs = args.specs or [str(p) for p in plan.specs]
        base = {"seeds": list(plan.seeds), "simulators": list(plan.simulators), "modes": list(plan.modes),
                "samples": plan.samples, "gaps": plan.gaps, "stalls": plan.stalls, "sink": plan.sink,
                "rtl": [str(p) for p in plan.rtl], "top": plan.top, "jobs": plan.jobs}
        plan = make_plan(specs, **{**base, **given})
    else:
        plan = make_plan(args.specs, **given)
    out = Path(args.output)
    check_target(out.absolute(), args.force, "--output")
    n = len(plan.runs())
    print(f"cfarvec regression: {n} runs, {plan.jobs} at a time, in {out}", file=sys.stderr, flush=True)

    def progress(o) -> None:
        print(f"  {o.status.upper():<5} {o.run.classname}.{o.run.name} ({o.seconds:.1f} s)", file=sys.stderr,
              flush=True)

    outcomes = run_plan(plan, out, keep_passing=args.keep_passing, progress=progress)
    junit = write_junit(outcomes, args.junit or out / "junit.xml")
    if args.json:
        for o in outcomes:
            print(json.dumps({"spec": str(o.run.spec), "mode": o.run.mode, "simulator": o.run.simulator,
                              "seed": o.run.seed, "status": o.status, "seconds": round(o.seconds, 3),
                              "message": o.message, "command": o.command, "summary": o.summary}, sort_keys=True))
    else:
        print(format_table(outcomes))
        print(f"JUnit: {junit}")
    return 0 if all(o.status == "pass" for o in outcomes) else 1

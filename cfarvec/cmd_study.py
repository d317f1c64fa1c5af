"""``cfarvec study``: what each word width costs in false alarms, detection and SNR.

Parses options, then :mod:`refmodel.study.quant_study` runs the sweep and
:mod:`refmodel.study.study_report` writes the report folder. Method and outputs:
``docs/quantisation-study.md``.
"""

from __future__ import annotations

import argparse
import sys

_DESCRIPTION = """\
Sweep the fixed-point formats of one block spec and measure, at every grid
point, the pipeline's exact false-alarm probability (and a Monte Carlo check),
its Pd for Swerling 0 and Swerling I targets against the float model, the
quantisation loss in dB, threshold errors, saturation and clipping; then
recommend the cheapest point within the budget.

Sweep values come from the spec's [study] section and are overridden by the
options below. Integer axes take a list '6,8,12', an inclusive range '4:16' or
'4:16:2', or a mix '4:8,12'. Axes not given stay at the spec's value; the grid
is the product of all axes.

Writes DIR/points.csv, DIR/summary.md, DIR/study.json and three PNG plots.
DIR must be new or empty (or use --force); it is written whole or not at all."""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``study`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser(
        "study", help="quantisation-loss study over word widths",
        description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("spec", metavar="SPEC", help="block spec TOML file")
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="report folder to create")
    g = p.add_argument_group("sweep axes")
    g.add_argument("--input-bits", metavar="LIST", help="input word widths W_in")
    g.add_argument("--alpha-frac-bits", metavar="LIST", help="fraction bits of the constant A")
    g.add_argument("--alpha-csd-digits", metavar="LIST",
                   help="non-zero signed digits allowed in A (0 = plain rounding)")
    g.add_argument("--threshold-frac-bits", metavar="LIST", help="fraction bits kept in the threshold")
    g.add_argument("--rounding", metavar="LIST", help="rounding modes: floor, half-up, half-even")
    g.add_argument("--noise-lsb", metavar="LIST",
                   help="noise levels: mean noise power in LSBs of the spec's input word "
                        "(default 2^floor(W_in/2))")
    g.add_argument("--noise-scaling", choices=("track", "fixed"), default=None,
                   help="track (default): the noise level follows the input width, same analog level; "
                        "fixed: the same number of LSBs at every width")
    m = p.add_argument_group("metrics")
    m.add_argument("--snr-db", metavar="LIST", help="SNRs (dB) of the Pd table (default 6,10,13,16,20)")
    m.add_argument("--pd", metavar="P", help="Pd at which the SNR needed and the loss are taken (default 0.9)")
    m.add_argument("--swerling", metavar="LIST", help="target models, 0 and/or 1 (default 0,1)")
    m.add_argument("--mc-trials", metavar="N", help="Monte Carlo windows per point, 0 = none (default 1000000)")
    m.add_argument("--confidence", metavar="C", help="Clopper-Pearson confidence level (default 0.999)")
    m.add_argument("--seed", metavar="N", help="root seed of the Monte Carlo (default 1)")
    b = p.add_argument_group("budget")
    b.add_argument("--max-loss-db", metavar="DB", help="largest acceptable quantisation loss (default 0.1)")
    b.add_argument("--pfa-tolerance", metavar="REL",
                   help="largest acceptable |Pfa/Pfa_design - 1| (default 0.1)")
    x = p.add_argument_group("execution")
    x.add_argument("--workers", type=int, metavar="N", help="local worker processes (default: all cores)")
    x.add_argument("--scheduler", metavar="ADDRESS", help="run on this Dask distributed scheduler instead")
    x.add_argument("--no-progress", action="store_true", help="no progress bar")
    x.add_argument("--force", action="store_true", help="replace a non-empty DIR")
    p.set_defaults(func=run)
    return p


def options_from_args(args: argparse.Namespace) -> dict:
    """The study settings given on the command line (``None`` = not given)."""
    return {
        "input_bits": args.input_bits, "alpha_frac_bits": args.alpha_frac_bits,
        "alpha_csd_digits": args.alpha_csd_digits, "threshold_frac_bits": args.threshold_frac_bits,
        "rounding": args.rounding, "noise_level_lsb": args.noise_lsb, "noise_scaling": args.noise_scaling,
        "snr_db": args.snr_db, "pd": args.pd, "swerling": args.swerling, "mc_trials": args.mc_trials,
        "confidence": args.confidence, "seed": args.seed, "max_loss_db": args.max_loss_db,
        "pfa_tolerance": args.pfa_tolerance,
    }


def run(args: argparse.Namespace) -> int:
    """Run ``cfarvec study``; returns the exit code (0)."""
    from pathlib import Path

    from refmodel.block_spec import load_spec
    from refmodel.errors import require
    from refmodel.study.quant_study import run_study, study_config
    from refmodel.output_folder import check_safe_target, check_target
    from refmodel.study.study_report import write_report

    spec = load_spec(args.spec)
    cfg = study_config(spec, options_from_args(args))
    # Refuse an unsafe or occupied target before the (long) sweep, not after it.
    out = check_safe_target(args.output, "--output", protect=[args.spec])
    check_target(out, args.force, "--output")
    require(args.workers is None or args.workers >= 1, "--workers", f"got {args.workers}", "an integer >= 1")
    result = run_study(spec, cfg, workers=args.workers, scheduler=args.scheduler, progress=not args.no_progress)
    write_report(result, out, force=args.force)
    if result.recommended is not None:
        r = result.rows[result.recommended]
        print(f"recommended point #{r['index']}: input_bits {r['input_bits']}, alpha_frac_bits "
              f"{r['alpha_frac_bits']}, alpha_csd_digits {r['alpha_csd_digits']}, threshold_frac_bits "
              f"{r['threshold_frac_bits']}, rounding {r['rounding']} ({r['cost_bits']} bits)")
    else:
        print("no point of the grid meets the budget (see summary.md)")
    print(f"report: {out}/summary.md", file=sys.stdout)
    return 0

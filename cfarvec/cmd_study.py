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
quantisation loss in dB, threshold errors, saturation and clipping, and the
area of the reference core built for it (Yosys, cached); then recommend the
point of least area within the budget, over a range of noise levels when
one is given. Every point is run with the constant A rounded from alpha and
with A re-tuned to the exact quantised Pfa (--constant).

Sweep values come from the spec's [study] section and are overridden by the
options below. Integer axes take a list '6,8,12', an inclusive range '4:16' or
'4:16:2', or a mix '4:8,12'. Axes not given stay at the spec's value; the grid
is the product of all axes.

Writes DIR/points.csv, DIR/summary.md, DIR/study.json and four PNG plots
(loss, Pfa, Pd, and the Pareto plot of loss against area).
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
    g.add_argument("--threshold-bits", metavar="LIST",
                   help="threshold widths W_T (0 = automatic, the width that never saturates)")
    g.add_argument("--sum-bits", metavar="LIST", help="side-sum widths W_S (0 = automatic, the smallest lossless)")
    g.add_argument("--rounding", metavar="LIST", help="rounding modes: floor, half-up, half-even")
    g.add_argument("--input-converter", metavar="LIST",
                   help="how the analogue power becomes a word: floor (default), round (to nearest)")
    g.add_argument("--constant", metavar="LIST",
                   help="rounded (A = alpha rounded), retuned (A chosen on the exact Pfa); default both")
    g.add_argument("--retune", choices=("closest-not-above", "closest"), default=None,
                   help="how the retuned A is chosen: exact Pfa closest to the design without exceeding it "
                        "(default), or closest")
    g.add_argument("--noise-lsb", metavar="LIST",
                   help="noise levels: mean noise power in LSBs of the spec's input word "
                        "(default 2^floor(W_in/2))")
    g.add_argument("--noise-scaling", choices=("track", "fixed"), default=None,
                   help="track (default): the noise level follows the input width, same analog level; "
                        "fixed: the same number of LSBs at every width")
    g.add_argument("--noise-range", metavar="LO:HI",
                   help="noise levels (LSBs of the spec's input word) over which the budget must hold too")
    g.add_argument("--noise-range-points", metavar="N", help="levels in the noise range, geometric steps (default 5)")
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
    a = p.add_argument_group("area (Yosys synthesis of the reference core per distinct parameter set)")
    a.add_argument("--no-area", action="store_true", help="no synthesis: cheapest by word bits")
    a.add_argument("--area-flow", choices=("ice40", "xilinx"), default=None, help="Yosys flow (default ice40)")
    a.add_argument("--area-weights", metavar="W",
                   help="LUT-equivalent weights, e.g. lut=1,ff=0.5,carry=0,srl=1,dsp=100,memory_bit=0.015625")
    a.add_argument("--area-cache", metavar="DIR",
                   help="cache folder of synthesis results (default $CFARVEC_AREA_CACHE or ~/.cache/cfarvec/area)")
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
        "threshold_bits": args.threshold_bits, "sum_bits": args.sum_bits, "constant": args.constant,
        "input_converter": args.input_converter,
        "retune": args.retune, "noise_range_lsb": args.noise_range, "noise_range_points": args.noise_range_points,
        "rounding": args.rounding, "noise_level_lsb": args.noise_lsb, "noise_scaling": args.noise_scaling,
        "snr_db": args.snr_db, "pd": args.pd, "swerling": args.swerling, "mc_trials": args.mc_trials,
        "confidence": args.confidence, "seed": args.seed, "max_loss_db": args.max_loss_db,
        "pfa_tolerance": args.pfa_tolerance, "area_flow": args.area_flow, "area_weights": args.area_weights,
    }


def run(args: argparse.Namespace) -> int:
    """Run ``cfarvec study``; returns the exit code (0)."""
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
    area = None if args.no_area else area_coster(args, cfg, spec)
    result = run_study(spec, cfg, workers=args.workers, scheduler=args.scheduler, progress=not args.no_progress,
                       area=area)
    write_report(result, out, force=args.force)
    if result.recommended is not None:
        r = result.rows[result.recommended]
        print(f"recommended point #{r['index']}: input_bits {r['input_bits']}, alpha_frac_bits "
              f"{r['alpha_frac_bits']}, alpha_csd_digits {r['alpha_csd_digits']}, threshold_frac_bits "
              f"{r['threshold_frac_bits']}, rounding {r['rounding']}, constant {r['constant']} A = {r['alpha_int']}"
              + (f" (rounding gives {r['alpha_int_rounded']})" if r["constant"] == "retuned" else "")
              + f", Pfa {r['pfa_ratio']:.4f} x design"
              + (f", area {r['area_luteq']:g} LUT-equivalents" if "area_luteq" in r else f" ({r['cost_bits']} bits)"))
    else:
        print("no point of the grid meets the budget (see summary.md)")
    print(f"report: {out}/summary.md", file=sys.stdout)
    return 0


def area_coster(args: argparse.Namespace, cfg, spec=None):
    """The area-costing callable handed to the study (:class:`hdl_tb.area_cost.AreaCoster`, or
    :class:`hdl_tb.area_cost.MapAreaCoster` on the map core for a map block ``spec``).

    Flow and weights come from ``cfg`` (``--area-flow`` / ``--area-weights``, else
    ``[study]`` ``area_flow`` / ``area_weights``).

    Raises
    ------
    refmodel.errors.SpecError
        Bad ``--area-weights``, or Yosys not installed (naming ``--no-area`` as the way out).
    """
    import shutil

    from hdl_tb.area_cost import AreaCoster, MapAreaCoster, parse_weights
    from refmodel.errors import SpecError

    weights = parse_weights(cfg.area_weights, field=cfg.fields["area_weights"])
    if shutil.which("yosys") is None:
        raise SpecError("--no-area", "yosys not found on PATH, so the area cannot be costed",
                        "Yosys installed (`make tools`), or --no-area")
    options = dict(flow=cfg.area_flow, weights=weights, cache_dir=args.area_cache, workers=args.workers,
                   progress=not args.no_progress)
    if getattr(spec, "is_map", False):
        return MapAreaCoster(spec, **options)
    return AreaCoster(**options)

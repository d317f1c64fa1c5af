"""``cfarvec design``: threshold multiplier (alpha), Pfa, Pd and CFAR loss of one detector.

The work is done by :mod:`refmodel.threshold_design`; this module only parses
options, builds a report dictionary and prints it as text or JSON.

To extend the command (e.g. with fixed-point fields), add options in
:func:`add_parser`, add keys to the dictionary in :func:`build_report` and,
for the text output, append a function to ``TEXT_SECTIONS``.
"""

from __future__ import annotations

import argparse
import json
from typing import TYPE_CHECKING, Callable

from refmodel.errors import SpecError
from refmodel.spec_fields import integer_list, number_list

if TYPE_CHECKING:
    from refmodel.block_spec import BlockSpec

# The detector kinds of refmodel.threshold_design.KINDS, here so that parsing needs no scipy
# (test_cli_conventions checks that the two agree).
KINDS = ("ca", "go", "so", "os")

DEFAULT_SNR_DB = (10.0, 13.0, 16.0)
DEFAULT_PD = 0.9

_DESCRIPTION = """\
Design a CFAR threshold multiplier (alpha) for a wanted false-alarm probability
(--pfa), or analyse a given alpha (--alpha), for square-law detected
exponential noise. Reports Pd at the requested SNRs for Swerling 0 and
Swerling I targets, next to the ideal detector that knows the noise power,
and the CFAR loss at --pd. Formulas and sources: docs/theory.md.

What alpha multiplies: ca = mean of all N reference cells; go / so = the
larger / smaller of the two half-window means (N/2 cells per side);
os = the K-th smallest of the N reference cells. N counts both sides
together (--ref-cells-total); a block spec counts per side
(detector.ref_cells_per_side = N/2). List options take comma-separated
values: --snr-db 10,13,16 (a list starting with a minus sign needs '=':
--snr-db=-3,0,3), --swerling 0,1."""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``design`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser(
        "design",
        description=_DESCRIPTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("--detector", choices=KINDS, default="ca", help="detector kind (default: ca)")
    p.add_argument(
        "--spec", metavar="FILE", help="block spec (TOML): take the detector from it and add the fixed-point report"
    )
    p.add_argument("--ref-cells-total", type=int, metavar="N",
                   help="reference cells N in total, both sides together (the spec's ref_cells_per_side is N/2)")
    p.add_argument("--rank", type=int, metavar="K", help="rank K in 1..N of the order statistic (os only)")
    target = p.add_mutually_exclusive_group()
    target.add_argument("--pfa", type=float, metavar="P", help="wanted false-alarm probability, in (0, 1)")
    target.add_argument("--alpha", type=float, metavar="A", help="given threshold multiplier (alpha), > 0")
    p.add_argument(
        "--snr-db",
        default=",".join(f"{v:g}" for v in DEFAULT_SNR_DB),
        metavar="LIST",
        help="SNRs (dB) at which to report Pd, comma-separated (default: %(default)s)",
    )
    p.add_argument(
        "--pd", type=float, default=DEFAULT_PD, metavar="P", help="Pd at which to report the CFAR loss (default: 0.9)"
    )
    p.add_argument(
        "--swerling",
        default="0,1",
        metavar="LIST",
        help="target models to report, comma-separated: 0 (non-fluctuating), 1 (Swerling I) (default: 0,1)",
    )
    p.add_argument("--retune-constant", choices=("closest-not-above", "closest"), metavar="MODE", default=None,
                   help="with --spec: also choose the constant A on the quantised pipeline's exact Pfa "
                        "(closest-not-above or closest to the design Pfa; docs/quantisation-study.md)")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    p.set_defaults(func=run)
    return p


def build_report(args: argparse.Namespace) -> dict:
    """Compute the design and return it as a JSON-ready dictionary.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options of the ``design`` sub-command.

    Returns
    -------
    dict
        :meth:`refmodel.threshold_design.Design.to_dict`.

    Raises
    ------
    refmodel.errors.SpecError
        On any out-of-range option.
    """
    from refmodel import threshold_design as td

    spec = None
    kind, n_ref, rank, pfa, alpha = args.detector, args.ref_cells_total, args.rank, args.pfa, args.alpha
    snr_db = number_list("--snr-db", args.snr_db)
    retune = getattr(args, "retune_constant", None)
    if retune is not None and args.spec is None:
        raise SpecError("--retune-constant", "given without --spec", "--spec FILE (the constant is a block's)")
    swerling = integer_list("--swerling", args.swerling, 0, 1)
    if args.spec is not None:
        given = [o for o, v in (("--ref-cells-total", n_ref), ("--rank", rank), ("--pfa", pfa), ("--alpha", alpha))
                 if v is not None]
        if given:
            raise SpecError(given[0], "given together with --spec", "either --spec FILE or the detector options")
        from refmodel.block_spec import load_spec  # only with --spec: the detector options need no spec module

        spec = load_spec(args.spec)
        kind, n_ref, rank = spec.kind, spec.n_ref, spec.rank
        pfa, alpha = (spec.design_pfa, None) if spec.design_pfa is not None else (None, spec.alpha)
    else:
        if n_ref is None:
            raise SpecError("--ref-cells-total", "missing", "an integer N >= 1 (or --spec FILE)")
        if pfa is None and alpha is None:
            raise SpecError("--pfa", "missing (neither --pfa nor --alpha given)", "a number in (0, 1), or --alpha A > 0")
    try:
        d = td.design(kind, n_ref, pfa=pfa, alpha=alpha, rank=rank, snr_db=snr_db, loss_pd=args.pd,
                      swerling=swerling)
    except SpecError as exc:
        if exc.field == "--ref-cells":  # the API's name for N; this option says that it is the total
            raise SpecError("--ref-cells-total", exc.problem, exc.allowed) from None
        raise
    except OverflowError:  # alpha beyond the float range, e.g. ca with N = 1 at the smallest Pfa
        given = ("--pfa", pfa) if pfa is not None else ("--alpha", alpha)
        raise SpecError(given[0], f"got {given[1]!r}: alpha or Pfa overflows for N = {n_ref}",
                        "a less extreme value") from None
    report = d.to_dict()
    if spec is not None:
        report["fixed"] = fixed_report(spec)
        if retune is not None:
            report["fixed"]["retuned"] = retuned_report(spec, retune)
        if getattr(spec, "is_map", False):  # range-Doppler block: refmodel/map_spec.py
            report["map"] = spec.design_report()
    return report


def fixed_report(spec: "BlockSpec") -> dict:
    """The quantised constant of a block spec and the false-alarm rate it realises.

    Parameters
    ----------
    spec : refmodel.block_spec.BlockSpec
        A validated block spec.

    Returns
    -------
    dict
        Spec source, the exact and quantised constant, its signed digits,
        the realised alpha; ``float_pfa_at_realised_alpha``, the float formula
        of :mod:`refmodel.threshold_design` evaluated at the realised alpha;
        ``exact_pfa``, per noise level of the spec's study (``study.noise_level_lsb``,
        default ``2**floor(input_bits / 2)`` LSBs), the exact Pfa of an interior
        cell of the quantised pipeline (:mod:`refmodel.fixedpoint.exact_pfa`)
        with its error bound; both against the design Pfa; and every derived
        width (:meth:`BlockSpec.derived`).
    """
    from refmodel import threshold_design as td
    from refmodel.fixedpoint.exact_pfa import trigger_law
    from refmodel.map_spec import interior_twin
    from refmodel.study.quant_study import study_config

    design_pfa = spec.design_pfa if spec.design_pfa is not None else td.pfa_from_alpha(
        spec.kind, spec.n_ref, spec.alpha, spec.rank)
    float_pfa = td.pfa_from_alpha(spec.kind, spec.n_ref, spec.realised_alpha, spec.rank)
    exact = []
    interior = interior_twin(spec)  # a map block's interior cells have the false-alarm law of its twin
    for noise in study_config(interior).axes["noise_level_lsb"]:
        law = trigger_law(interior, noise, pfa_hint=min(design_pfa, 1e-6))
        pfa = law.pfa()
        exact.append({"noise_lsb": noise, "pfa": pfa, "error_bound": law.pfa_error_bound(),
                      "over_design_pfa": pfa / design_pfa})
    return {
        "spec": spec.source,
        "alpha": spec.alpha,
        "alpha_scaled_exact": spec.alpha_target,
        "alpha_digits_signed": [[sign, power] for sign, power in spec.alpha_digits],
        "design_pfa": design_pfa,
        "float_pfa_at_realised_alpha": float_pfa,
        "float_pfa_over_design_pfa": float_pfa / design_pfa,
        "exact_pfa": exact,
        **spec.derived(),
    }


def retuned_report(spec: "BlockSpec", mode: str) -> dict:
    """The constant A re-tuned to the exact Pfa of the quantised pipeline (:mod:`refmodel.study.retune`).

    Matched at the first noise level of the spec's study (``study.noise_level_lsb``,
    default ``2**floor(input_bits / 2)`` LSBs), beside the rounded constant.
    """
    from refmodel import threshold_design as td
    from refmodel.map_spec import interior_twin
    from refmodel.study.quant_study import study_config
    from refmodel.study.retune import retune_constant

    interior = interior_twin(spec)
    design_pfa = spec.design_pfa if spec.design_pfa is not None else td.pfa_from_alpha(
        spec.kind, spec.n_ref, spec.alpha, spec.rank)
    noise = study_config(interior).axes["noise_level_lsb"][0]
    data = interior.to_dict(resolved=True)
    data.pop("study", None)
    r = retune_constant(interior, data, noise, design_pfa, mode)
    return {"mode": mode, "noise_lsb": noise, "alpha_int": r.alpha_int,
            "alpha_digits_signed": [[sign, power] for sign, power in r.spec.alpha_digits],
            "realised_alpha": r.spec.realised_alpha, "exact_pfa": r.pfa, "error_bound": r.pfa_bound,
            "over_design_pfa": r.pfa / design_pfa, "met": r.met, "rounded_alpha_int": r.alpha_int_rounded,
            "rounded_exact_pfa": r.pfa_rounded, "rounded_over_design_pfa": r.pfa_rounded / design_pfa,
            "threshold_bits": r.spec.threshold_bits}


def _text_retuned(f: dict) -> list[str]:
    if "retuned" not in f:
        return []
    t = f["retuned"]
    digits = " ".join(f"{'+' if s > 0 else '-'}2^{p}" for s, p in t["alpha_digits_signed"])
    return [
        f"  re-tuned A        {t['alpha_int']}  ({t['mode']}, noise {t['noise_lsb']:g} LSB; rounding gives "
        f"{t['rounded_alpha_int']})",
        f"  its digits        {len(t['alpha_digits_signed'])}: {digits}",
        f"  its exact Pfa     {t['exact_pfa']:.6e}  (ratio {t['over_design_pfa']:.4f}; rounded A: ratio "
        f"{t['rounded_over_design_pfa']:.4f}){'' if t['met'] else '  -- no constant tried meets the mode'}",
        f"  its alpha         {t['realised_alpha']:.10g}  (threshold width {t['threshold_bits']} bits)",
    ]


def _text_fixed(r: dict) -> list[str]:
    if "fixed" not in r:
        return []
    f = r["fixed"]
    digits = " ".join(f"{'+' if s > 0 else '-'}2^{p}" for s, p in f["alpha_digits_signed"])
    return [
        f"Fixed point ({f['spec']})",
        f"  constant A        {f['alpha_int']}  ({f['alpha_bits']} bits, exact {f['alpha_scaled_exact']:.6f})",
        f"  signed digits     {f['alpha_digits']}: {digits}",
        f"  realised alpha    {f['realised_alpha']:.10g}  (design {f['alpha']:.10g})",
        f"  float Pfa         {f['float_pfa_at_realised_alpha']:.6e}  (float formula at the realised alpha; design "
        f"{f['design_pfa']:.6e}, ratio {f['float_pfa_over_design_pfa']:.4f})",
        *(f"  exact Pfa         {e['pfa']:.6e}  (quantised pipeline, interior cell, noise {e['noise_lsb']:g} LSB, "
          f"error <= "
          f"{e['error_bound']:.1e}; ratio {e['over_design_pfa']:.4f})" for e in f["exact_pfa"]),
        f"  widths            side sum {f['side_sum_bits']}, statistic {f['statistic_bits']}, product "
        f"{f['product_bits']}, threshold {f['threshold_bits']}, output word {f['output_bits']} bits",
        f"  rounding          drops {f['drop_bits']} bits (mean shift {f['mean_shift']})",
        f"  timing            latency {f['latency_cycles']} cycles, drain {f['drain_cycles']} cycles per frame",
        *_text_retuned(f),
    ]


def _text_map(r: dict) -> list[str]:
    if "map" not in r:
        return []
    m = r["map"]
    shape = "reference ring" if m["window"] == "ring" else "cross-shaped window"
    return [
        "Range-Doppler map",
        f"  map               {m['map'][0]} range cells x {m['map'][1]} Doppler bins, {m['order']}, edges: range "
        f"{m['range_edge']}, Doppler {m['doppler_edge']}",
        f"  window            {shape}, {m['window_rectangle'][0]} x {m['window_rectangle'][1]} (Doppler x range) "
        f"around a {m['guard_rectangle'][0]} x {m['guard_rectangle'][1]} guard rectangle",
        f"  reference cells   N = {m['ref_cells']}, {m['half_cells']} in each range half (design on "
        f"{m['design_cells']} cells)",
        f"  memory            {m['line_buffers']} line buffers of {m['padded_line']} cells = {m['line_buffer_bits']} "
        f"bits, input store {m['store_bits']} bits",
        f"  timing            first word {m['latency_cycles']} cycles after a map's first cell, window delay "
        f"{m['window_delay']} steps, {m['drain_cycles']} pad steps per map",
    ]


def _case_name(sw: int) -> str:
    return "Swerling 0" if sw == 0 else "Swerling I"


def _text_threshold(r: dict) -> list[str]:
    geometry = f"{r['detector']}, N = {r['ref_cells']} reference cells"
    if r["rank"] is not None:
        geometry += f", rank K = {r['rank']}"
    how = "designed for the given Pfa" if r["inputs"]["pfa"] is not None else "from the given alpha"
    return [
        "Threshold",
        f"  detector   {geometry}",
        f"  rule       {r['threshold']}",
        f"  alpha      {r['alpha']:.10g}",
        f"  Pfa        {r['pfa']:.6e}  ({how})",
    ]


def _text_pd(r: dict) -> list[str]:
    cases = r["swerling"]
    head = f"  {'SNR (dB)':>9}"
    for c in cases:
        name = _case_name(c["swerling"])
        head += f"  {name + ' CFAR':>17}  {name + ' ideal':>17}"
    lines = ["Detection probability (ideal = noise power known)", head]
    for i, snr in enumerate(r["snr_db"]):
        row = f"  {snr:>9.2f}"
        for c in cases:
            row += f"  {c['pd'][i]:>17.6f}  {c['ideal_pd'][i]:>17.6f}"
        lines.append(row)
    return lines


def _text_loss(r: dict) -> list[str]:
    lines = [
        f"CFAR loss at Pd = {r['loss_pd']:g}, Pfa = {r['pfa']:.3e}",
        f"  {'target':<11} {'CFAR needs':>12} {'ideal needs':>12} {'loss':>10}",
    ]
    for c in r["swerling"]:
        lines.append(
            f"  {_case_name(c['swerling']):<11} {c['snr_db_required']:>9.3f} dB"
            f" {c['snr_db_ideal']:>9.3f} dB {c['cfar_loss_db']:>7.3f} dB"
        )
    return lines


#: Text report sections, in order; each maps the report dict to lines.
TEXT_SECTIONS: list[Callable[[dict], list[str]]] = [_text_threshold, _text_pd, _text_loss, _text_fixed, _text_map]


def format_text(report: dict) -> str:
    """Render a report dictionary as plain text (sections separated by a blank line)."""
    return "\n\n".join("\n".join(lines) for lines in (section(report) for section in TEXT_SECTIONS) if lines)


def run(args: argparse.Namespace) -> int:
    """Run ``cfarvec design``; returns the exit code (0)."""
    report = build_report(args)
    if args.json:
        print(json.dumps(report, indent=2, allow_nan=False))
    else:
        print(format_text(report))
    return 0

"""Report of a quantisation study: ``points.csv``, three PNG plots, ``summary.md``, ``study.json``.

The folder is written whole or not at all: everything goes to a temporary
folder beside the target, which is renamed into place when complete. A
non-empty target is refused unless ``force`` is set (it is then replaced only
after the new report is complete).

Files
-----
``points.csv``
    One row per grid point, every metric of :func:`refmodel.study.quant_study.evaluate_point`.
``loss_vs_width.png``
    Quantisation loss (dB) against each swept axis, through the reference point.
``pfa_vs_width.png``
    Exact and Monte Carlo Pfa of the pipeline, and the float formula's Pfa at
    the realised alpha, against each swept axis; design Pfa and tolerance marked.
``pd_vs_snr.png``
    Pd against SNR, float design against the pipeline at the reference point
    and at the cheapest point, per target model.
``summary.md``
    The recommendation (or the plain statement that no point meets the
    budget), the definitions, a table of the points and the plots.
``study.json``
    The study settings and the recommended point, for tools.
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np

from .. import threshold_design as td
from ..output_folder import staged_folder
from .quant_study import AXES, StudyResult

__all__ = ["reference_row", "write_report"]

_AXIS_LABEL = {
    "input_bits": "input word width W_in (bits)",
    "alpha_frac_bits": "alpha fraction bits F_A (bits)",
    "alpha_csd_digits": "non-zero signed digits in A (count, 0 = plain rounding)",
    "threshold_frac_bits": "threshold fraction bits F_T (bits)",
    "noise_level_lsb": "noise level (LSB of the spec's input word)",
    "rounding": "rounding mode",
}
_SW_NAME = {0: "Swerling 0", 1: "Swerling I"}
FILES = ("points.csv", "loss_vs_width.png", "pfa_vs_width.png", "pd_vs_snr.png", "summary.md", "study.json")


def _worst_loss(row, cfg) -> float:
    return max(row[f"loss_sw{sw}_db"] for sw in cfg.swerling)


def reference_row(result: StudyResult) -> dict:
    """The point the plots slice through: the recommendation, else the point of smallest worst loss."""
    if result.recommended is not None:
        return result.rows[result.recommended]
    finite = [r for r in result.rows if math.isfinite(_worst_loss(r, result.config))]
    pool = finite or result.rows
    return min(pool, key=lambda r: (_worst_loss(r, result.config) if finite else 0.0, -r["cost_bits"]))


def _cheapest_row(result: StudyResult) -> dict:
    return min(result.rows, key=lambda r: (r["cost_bits"], r["index"]))


def _plot_axes(result: StudyResult) -> list[str]:
    return [a for a in result.config.swept if a != "rounding"]


def _slice(result: StudyResult, axis: str, ref: dict) -> list[dict]:
    others = [a for a in AXES if a != axis]
    rows = [r for r in result.rows if all(r[a] == ref[a] for a in others)]
    return sorted(rows, key=lambda r: r[axis])


def _fmt(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v)
    return str(v)


def _write_csv(result: StudyResult, path: Path) -> None:
    cols = list(result.rows[0].keys())
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(cols)
        for r in result.rows:
            w.writerow([_fmt(r[c]) for c in cols])


def _finite(values) -> np.ndarray:
    a = np.array(values, dtype=float)
    a[~np.isfinite(a)] = np.nan
    return a


def _panels(n: int):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axs = plt.subplots(1, max(n, 1), figsize=(5.0 * max(n, 1), 4.0), squeeze=False)
    return plt, fig, axs[0]


def _x_of(rows, axis):
    return [r[axis] for r in rows] if axis else [r["index"] for r in rows]


def _plot_loss(result: StudyResult, path: Path, ref: dict) -> None:
    cfg = result.config
    axes = _plot_axes(result) or [None]
    plt, fig, axs = _panels(len(axes))
    for ax, axis in zip(axs, axes):
        rows = _slice(result, axis, ref) if axis else result.rows
        all_x = _x_of(result.rows, axis)
        ax.scatter(all_x, _finite([_worst_loss(r, cfg) for r in result.rows]), s=10, color="0.75",
                   label="all points (worst case)", zorder=1)
        for sw in cfg.swerling:
            ax.plot(_x_of(rows, axis), _finite([r[f"loss_sw{sw}_db"] for r in rows]), marker="o",
                    label=f"{_SW_NAME[sw]}, through the reference point", zorder=2)
        ax.axhline(cfg.max_loss_db, color="k", linestyle="--", linewidth=1, label=f"budget {cfg.max_loss_db:g} dB")
        ax.set_xlabel(_AXIS_LABEL[axis] if axis else "grid point (index)")
        ax.set_ylabel(f"quantisation loss at Pd = {cfg.pd:g} (dB)")
        if axis == "noise_level_lsb":
            ax.set_xscale("log", base=2)
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=8)
    fig.suptitle("Extra SNR the pipeline needs over the float detector at the same Pfa")
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def _plot_pfa(result: StudyResult, path: Path, ref: dict) -> None:
    cfg = result.config
    axes = _plot_axes(result) or [None]
    plt, fig, axs = _panels(len(axes))
    for ax, axis in zip(axs, axes):
        rows = _slice(result, axis, ref) if axis else result.rows
        x = _x_of(rows, axis)
        ax.axhspan(cfg.design_pfa * (1 - cfg.pfa_tolerance), cfg.design_pfa * (1 + cfg.pfa_tolerance),
                   color="tab:green", alpha=0.15, label=f"design Pfa +-{cfg.pfa_tolerance:.0%}")
        ax.axhline(cfg.design_pfa, color="tab:green", linestyle="--", label=f"design Pfa {cfg.design_pfa:.3g}")
        ax.plot(x, _finite([r["pfa_exact"] for r in rows]), marker="o", label="pipeline, exact")
        ax.plot(x, _finite([r["pfa_exact_noise_x2"] for r in rows]), marker="^", linestyle="--",
                label="pipeline, exact, noise 3 dB higher (CFAR check)")
        ax.plot(x, _finite([r["pfa_float_realised"] for r in rows]), marker="s", linestyle=":",
                label="float formula at the realised alpha")
        mc = [r for r in rows if r["mc_trials"] and r["mc_false_alarms"] > 0]
        if mc:
            y = np.array([r["mc_pfa"] for r in mc])
            err = np.array([[r["mc_pfa"] - r["mc_ci_low"] for r in mc], [r["mc_ci_high"] - r["mc_pfa"] for r in mc]])
            ax.errorbar(_x_of(mc, axis), y, yerr=err, fmt="x", capsize=3,
                        label=f"Monte Carlo, {cfg.confidence:.1%} Clopper-Pearson")
        ax.set_yscale("log")
        ax.set_xlabel(_AXIS_LABEL[axis] if axis else "grid point (index)")
        ax.set_ylabel("false-alarm probability (per cell)")
        if axis == "noise_level_lsb":
            ax.set_xscale("log", base=2)
        ax.grid(True, which="both", alpha=0.3)
        ax.legend(fontsize=8)
    fig.suptitle("Realised false-alarm probability")
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def _plot_pd(result: StudyResult, path: Path, ref: dict, cheap: dict) -> None:
    cfg, spec = result.config, result.spec
    plt, fig, axs = _panels(len(cfg.swerling))
    for ax, sw in zip(axs, cfg.swerling):
        grid = result.curves[ref["index"]]["snr_db"]
        flt = [td.pd(spec.kind, spec.n_ref, spec.alpha, x, sw, spec.rank) for x in grid]
        ax.plot(grid, flt, color="k", label=f"float design (Pfa {cfg.design_pfa:.3g})")
        ax.plot(grid, result.curves[ref["index"]][f"pd_sw{sw}"], linestyle="--",
                label=f"pipeline, reference point #{ref['index']} ({ref['cost_bits']} bits, Pfa {ref['pfa_exact']:.2g})")
        if cheap["index"] != ref["index"]:
            ax.plot(grid, result.curves[cheap["index"]][f"pd_sw{sw}"], linestyle=":",
                    label=f"pipeline, cheapest point #{cheap['index']} ({cheap['cost_bits']} bits, "
                          f"Pfa {cheap['pfa_exact']:.2g})")
        ax.axhline(cfg.pd, color="0.5", linewidth=0.8)
        ax.set_xlabel("SNR per cell (dB)")
        ax.set_ylabel("probability of detection Pd")
        ax.set_title(_SW_NAME[sw])
        ax.set_ylim(0, 1)
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=8, loc="lower right")
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def _point_label(r: dict, swept) -> str:
    keys = [a for a in AXES if a in swept] or ["input_bits", "alpha_frac_bits", "threshold_frac_bits"]
    return ", ".join(f"{a} = {r[a]:g}" if isinstance(r[a], float) else f"{a} = {r[a]}" for a in keys)


def _num(v, fmt=".3g") -> str:
    if isinstance(v, float) and not math.isfinite(v):
        return "unreachable" if v > 0 else "n/a"
    return format(v, fmt)


def _summary(result: StudyResult) -> str:
    cfg, spec = result.config, result.spec
    rows = result.rows
    lines = ["# Quantisation study", ""]
    kind = spec.kind + (f", rank {spec.rank}" if spec.rank else "")
    lines += [
        f"Block: `{spec.source or 'in-memory spec'}` -- {kind}, {spec.ref_per_side} reference and "
        f"{spec.guard_per_side} guard cells per side, threshold factor (alpha) {spec.alpha:.6g}, "
        f"design Pfa {cfg.design_pfa:.3g}.",
        "",
        f"Grid: {len(rows)} points; swept: {', '.join(cfg.swept) or 'nothing (one point)'}. "
        f"Noise: square-law exponential, level given in LSBs of the spec's {cfg.base_input_bits}-bit input word"
        + (" and following the input width (`track`)." if cfg.noise_scaling == "track" else " at every width (`fixed`)."),
        "",
        f"Budget: quantisation loss at most {cfg.max_loss_db:g} dB for "
        f"{' and '.join(_SW_NAME[s] for s in cfg.swerling)} at Pd = {cfg.pd:g}, and the pipeline's exact Pfa "
        f"within {cfg.pfa_tolerance:.0%} of the design Pfa, also with the noise 3 dB higher (the CFAR property). Cost = input_bits + alpha_frac_bits + "
        "threshold_frac_bits (ties: fewer non-zero digits in A, cheaper rounding, smaller loss).",
        "",
        "## Recommendation",
        "",
    ]
    if result.recommended is not None:
        r = rows[result.recommended]
        lines += [
            f"**Point #{r['index']}: {_point_label(r, cfg.swept)}** -- cost {r['cost_bits']} bits "
            f"(input {r['input_bits']}, alpha fraction {r['alpha_frac_bits']}, threshold fraction "
            f"{r['threshold_frac_bits']}), A = {r['alpha_int']} ({r['alpha_nonzero_digits']} non-zero digits), "
            f"rounding {r['rounding']}, noise at {r['noise_lsb']:g} LSB.",
            "",
            f"- exact Pfa {r['pfa_exact']:.4g} ({r['pfa_ratio']:.4f} x design)",
        ]
        lines += [f"- loss {_num(r[f'loss_sw{sw}_db'])} dB ({_SW_NAME[sw]})" for sw in cfg.swerling]
    else:
        best_loss = min(rows, key=lambda r: _worst_loss(r, cfg))
        best_pfa = min(rows, key=lambda r: abs(r["pfa_ratio"] - 1))
        lines += [
            "**No point of this grid meets the budget.**",
            "",
            f"- smallest worst-case loss: {_num(_worst_loss(best_loss, cfg))} dB at point #{best_loss['index']} "
            f"({_point_label(best_loss, cfg.swept)}), whose Pfa is {best_loss['pfa_ratio']:.3f} x design;",
            f"- Pfa closest to the design: {best_pfa['pfa_ratio']:.3f} x design at point #{best_pfa['index']} "
            f"({_point_label(best_pfa, cfg.swept)}).",
            "",
            "Widen the grid (more bits, a higher noise level in LSBs) or relax the budget.",
        ]
    n_mc = [r for r in rows if r["mc_trials"]]
    agree = sum(1 for r in n_mc if r["mc_agrees"])
    lines += ["", "## Checks", ""]
    if n_mc:
        lines.append(f"The exact Pfa lies inside the {cfg.confidence:.1%} Clopper-Pearson interval of the Monte Carlo "
                     f"count ({n_mc[0]['mc_trials']} windows per point) at {agree} of {len(n_mc)} points "
                     f"(about {len(n_mc) * (1 - cfg.confidence):.2g} misses expected by chance).")
    else:
        lines.append("Monte Carlo was switched off (`mc_trials = 0`).")
    worst_bound = max(r["pfa_exact_err_bound"] / r["pfa_exact"] if r["pfa_exact"] > 0 else 0.0 for r in rows)
    lines.append(f"Largest stated error bound of an exact Pfa, relative: {worst_bound:.2g}.")
    lines += [
        "",
        "## Definitions",
        "",
        "- *exact Pfa*: the pipeline's false-alarm probability for an interior cell, computed from the exact law of "
        "the quantised, clipped input word (`docs/quantisation-study.md`).",
        "- *float Pfa at realised alpha*: the float formula evaluated at the threshold factor the integer constant A "
        "realises (alpha quantisation alone).",
        "- *Pfa, noise 3 dB higher*: the same at twice the noise level. A CFAR detector keeps its Pfa; where the "
        "noise sits well below one LSB the threshold is set by the LSB instead, the Pfa follows the noise level, "
        "and a negative loss (the advantage of a fixed threshold that happens to suit this noise level) can appear.",
        "- *loss*: SNR the pipeline needs for the target Pd minus the SNR the float detector needs at the pipeline's "
        "own exact Pfa. *snr_shift* in `points.csv` compares with the float detector at the design Pfa instead.",
        "- *thr_err_arith*: `T / 2^F_T - alpha * S / D` on the same integer statistic (constant and rounding). "
        "*thr_err_total*: against the float estimate of the unquantised powers (also input quantisation), LSBs.",
        "",
        "## Points",
        "",
    ]
    head = ["#"] + [a for a in AXES if a in cfg.swept] + ["cost", "Pfa exact / design", "same, noise +3 dB", "MC Pfa"] + [
        f"loss {_SW_NAME[s]} (dB)" for s in cfg.swerling] + ["meets"]
    lines.append("| " + " | ".join(head) + " |")
    lines.append("|" + "---|" * len(head))
    for r in sorted(rows, key=lambda r: (r["cost_bits"], r["index"])):
        cells = [str(r["index"])] + [_fmt(r[a]) for a in AXES if a in cfg.swept] + [
            str(r["cost_bits"]), f"{r['pfa_ratio']:.4f}", f"{r['pfa_ratio_noise_x2']:.4f}",
            f"{r['mc_pfa']:.3g}" if r["mc_trials"] else "-"] + [
            _num(r[f"loss_sw{s}_db"], ".4f") for s in cfg.swerling] + ["yes" if r["meets_budget"] else "no"]
        lines.append("| " + " | ".join(cells) + " |")
    lines += [
        "",
        "## Plots",
        "",
        "![Quantisation loss against word width](loss_vs_width.png)",
        "",
        "![Realised Pfa against word width](pfa_vs_width.png)",
        "",
        "![Pd against SNR, fixed against float](pd_vs_snr.png)",
        "",
    ]
    return "\n".join(lines)


def write_report(result: StudyResult, out_dir: str | Path, force: bool = False) -> Path:
    """Write the report folder atomically.

    Parameters
    ----------
    result : StudyResult
    out_dir : str or Path
        Target folder; must not exist or be empty, unless ``force``.
    force : bool
        Replace a non-empty target (only once the new report is complete).

    Returns
    -------
    Path
        The target folder.

    Raises
    ------
    SpecError
        For a non-empty target without ``force``, or a target that is a file.
    """
    target = Path(out_dir)
    with staged_folder(target, force, field="--output") as tmp:
        ref = reference_row(result)
        _write_csv(result, tmp / "points.csv")
        _plot_loss(result, tmp / "loss_vs_width.png", ref)
        _plot_pfa(result, tmp / "pfa_vs_width.png", ref)
        _plot_pd(result, tmp / "pd_vs_snr.png", ref, _cheapest_row(result))
        (tmp / "summary.md").write_text(_summary(result), encoding="utf-8")
        meta = {"config": result.config.to_dict(), "recommended": result.recommended,
                "reference_point": ref["index"], "float_snr_db": {str(k): v for k, v in result.float_snr_db.items()},
                "spec": result.spec.to_dict()}
        (tmp / "study.json").write_text(json.dumps(meta, indent=2, default=str), encoding="utf-8")
    return target

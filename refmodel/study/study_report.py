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
    the realised alpha, as ratios to the design Pfa on a linear axis, against
    each swept axis; the tolerance band marked; the worst case over the noise
    range when one is given.
``pareto.png``
    Worst loss against area (LUT-equivalents, or word bits without area):
    every point, those within the Pfa budget, and the Pareto front.
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

__all__ = ["edge_warnings", "no_effect_axes", "non_monotone_notes", "pareto_front", "reference_row", "write_report"]

_AXIS_LABEL = {
    "input_bits": "input word width W_in (bits)",
    "alpha_frac_bits": "alpha fraction bits F_A (bits)",
    "alpha_csd_digits": "non-zero signed digits in A (count, 0 = plain rounding)",
    "threshold_frac_bits": "threshold fraction bits F_T (bits)",
    "threshold_bits": "threshold width W_T (bits, 0 = automatic)",
    "sum_bits": "side-sum width W_S (bits, 0 = automatic)",
    "constant": "constant A",
    "input_converter": "input converter",
    "noise_level_lsb": "noise level (LSB of the spec's input word)",
    "rounding": "rounding mode",
}
_SW_NAME = {0: "Swerling 0", 1: "Swerling I"}
FILES = ("points.csv", "loss_vs_width.png", "pfa_vs_width.png", "pd_vs_snr.png", "pareto.png", "summary.md",
         "study.json")
#: Axes whose values are integers (integer ticks on the plots).
INTEGER_AXES = ("input_bits", "alpha_frac_bits", "alpha_csd_digits", "threshold_frac_bits", "threshold_bits",
                "sum_bits")
#: Columns that come from random draws, not from the pipeline's exact law (left out of the no-effect check).
_RANDOM_COLUMNS = ("mc_", "thr_err_total_")
#: Columns that describe a point rather than what it does.
_DESCRIPTIVE = ("index", "cost_bits", "noise_lsb", "area_key", "meets_budget", "recommended")


def _worst_loss(row, cfg) -> float:
    """Largest loss over the target models, and over the noise range when one is given."""
    vals = [row[f"loss_sw{sw}_db"] for sw in cfg.swerling]
    if cfg.noise_range:
        vals += [row[f"range_loss_sw{sw}_db"] for sw in cfg.swerling]
    return max(vals)


def _cost(row) -> float:
    """The cost the recommendation minimises: area in LUT-equivalents when known, else word bits."""
    return row.get("area_luteq", row["cost_bits"])


def _cost_name(result) -> str:
    return "area (LUT-equivalents)" if result.area_info is not None else "cost (word bits)"


def _spec_title(result) -> str:
    cfg, spec = result.config, result.spec
    name = Path(spec.source).name if spec.source else "in-memory spec"
    return (f"{name}: {spec.kind.upper()}, N = {spec.n_ref}, design Pfa {cfg.design_pfa:.3g}; budget loss "
            f"<= {cfg.max_loss_db:g} dB, Pfa within {cfg.pfa_tolerance:.0%}")


def reference_row(result: StudyResult) -> dict:
    """The point the plots slice through: the recommendation, else the point of smallest worst loss."""
    if result.recommended is not None:
        return result.rows[result.recommended]
    finite = [r for r in result.rows if math.isfinite(_worst_loss(r, result.config))]
    pool = finite or result.rows
    return min(pool, key=lambda r: (_worst_loss(r, result.config) if finite else 0.0, -r["cost_bits"]))


def _cheapest_row(result: StudyResult) -> dict:
    return min(result.rows, key=lambda r: (_cost(r), r["cost_bits"], r["index"]))


def _plot_axes(result: StudyResult) -> list[str]:
    return [a for a in result.config.swept if a not in ("rounding", "constant", "input_converter")]


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


def _panels(n: int, width: float = 5.0):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axs = plt.subplots(1, max(n, 1), figsize=(max(width * max(n, 1), 8.5), 5.6), squeeze=False)
    return plt, fig, axs[0]


def _style_axis(ax, axis) -> None:
    """Integer ticks on integer axes, a log scale for the noise level."""
    from matplotlib.ticker import MaxNLocator

    if axis in INTEGER_AXES:
        ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    if axis == "noise_level_lsb":
        ax.set_xscale("log", base=2)


def _finish(fig, axs, path, title) -> None:
    """One legend below the panels (outside the data), the title, and the file."""
    import matplotlib.pyplot as plt

    handles, labels = [], []
    for ax in axs:
        for h, lab in zip(*ax.get_legend_handles_labels()):
            if lab not in labels:
                handles.append(h)
                labels.append(lab)
    fig.suptitle(title, fontsize=10)
    fig.legend(handles, labels, loc="lower center", ncol=2, fontsize=8, frameon=False)
    fig.tight_layout(rect=(0, 0.06 + 0.035 * ((len(labels) + 1) // 2), 1, 0.93))
    fig.savefig(path, dpi=110)
    plt.close(fig)


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
        if cfg.noise_range:
            for sw in cfg.swerling:
                ax.plot(_x_of(rows, axis), _finite([r[f"range_loss_sw{sw}_db"] for r in rows]), marker="v",
                        linestyle="--", label=f"{_SW_NAME[sw]}, worst over the noise range")
        ax.axhline(cfg.max_loss_db, color="k", linestyle="--", linewidth=1, label=f"budget {cfg.max_loss_db:g} dB")
        ax.set_xlabel(_AXIS_LABEL[axis] if axis else "grid point (index)")
        ax.set_ylabel(f"quantisation loss at Pd = {cfg.pd:g} (dB)")
        _style_axis(ax, axis if axis else "input_bits")
        ax.grid(True, alpha=0.3)
    _finish(fig, axs, path, "Quantisation loss (extra SNR over the float detector at the same Pfa)\n"
            + _spec_title(result))


def _plot_pfa(result: StudyResult, path: Path, ref: dict) -> None:
    """Pfa over the design Pfa on a linear axis, with the tolerance band."""
    cfg = result.config
    axes = _plot_axes(result) or [None]
    plt, fig, axs = _panels(len(axes))
    d = cfg.design_pfa
    for ax, axis in zip(axs, axes):
        rows = _slice(result, axis, ref) if axis else result.rows
        x = _x_of(rows, axis)
        ax.axhspan(1 - cfg.pfa_tolerance, 1 + cfg.pfa_tolerance, color="tab:green", alpha=0.15,
                   label=f"tolerance +-{cfg.pfa_tolerance:.0%}")
        ax.axhline(1.0, color="tab:green", linestyle="--", linewidth=1, label="design Pfa")
        ax.plot(x, _finite([r["pfa_ratio"] for r in rows]), marker="o", label="pipeline, exact")
        ax.plot(x, _finite([r["pfa_ratio_noise_x2"] for r in rows]), marker="^", linestyle="--",
                label="pipeline, exact, noise 3 dB higher (CFAR check)")
        ax.plot(x, _finite([r["pfa_float_realised"] / d for r in rows]), marker="s", linestyle=":",
                label="float formula at the realised alpha")
        if cfg.noise_range:
            lo = _finite([r["range_pfa_ratio_min"] for r in rows])
            hi = _finite([r["range_pfa_ratio_max"] for r in rows])
            ax.fill_between(x, lo, hi, color="tab:orange", alpha=0.25,
                            label=f"exact, over noise {cfg.noise_range[0]:g}..{cfg.noise_range[-1]:g} LSB")
        mc = [r for r in rows if r["mc_trials"] and r["mc_false_alarms"] > 0]
        if mc:
            y = np.array([r["mc_pfa"] for r in mc]) / d
            err = np.array([[r["mc_pfa"] - r["mc_ci_low"] for r in mc], [r["mc_ci_high"] - r["mc_pfa"] for r in mc]])
            ax.errorbar(_x_of(mc, axis), y, yerr=err / d, fmt="x", capsize=3,
                        label=f"Monte Carlo, {cfg.confidence:.1%} Clopper-Pearson")
        ratios = [v for r in rows for v in (r["pfa_ratio"], r["pfa_ratio_noise_x2"]) if math.isfinite(v)]
        top = max([1 + 2 * cfg.pfa_tolerance] + ratios)
        ax.set_ylim(0, min(top * 1.05, max(3.0, 1 + 4 * cfg.pfa_tolerance)))
        ax.set_xlabel(_AXIS_LABEL[axis] if axis else "grid point (index)")
        ax.set_ylabel("Pfa / design Pfa (linear)\n(points above the frame are cut)")
        _style_axis(ax, axis if axis else "input_bits")
        ax.grid(True, alpha=0.3)
    _finish(fig, axs, path, "Realised false-alarm probability over the design value\n" + _spec_title(result))


def pareto_front(points: list[tuple[float, float, int]]) -> list[int]:
    """Indices of the points no other point beats in both cost and loss (smaller is better in both).

    Parameters
    ----------
    points : list of (cost, loss, index)

    Returns
    -------
    list of int
        The front's indices, by increasing cost.
    """
    front, best = [], math.inf
    for cost, loss, idx in sorted(points, key=lambda t: (t[0], t[1], t[2])):
        if loss < best:
            front.append(idx)
            best = loss
    return front


def _pareto_rows(result: StudyResult) -> tuple[list[dict], list[dict]]:
    """Points within the Pfa budget (loss left free) with finite loss, and their Pareto front."""
    cfg = result.config
    loose = [r for r in result.rows if _pfa_ok(r, cfg) and math.isfinite(_worst_loss(r, cfg))]
    front = set(pareto_front([(_cost(r), _worst_loss(r, cfg), r["index"]) for r in loose]))
    return loose, sorted((r for r in loose if r["index"] in front), key=lambda r: (_cost(r), r["index"]))


def _pfa_ok(row, cfg) -> bool:
    """The Pfa half of the budget (at the level, at twice it, over the range)."""
    vals = [row["pfa_ratio"], row["pfa_ratio_noise_x2"]]
    if cfg.noise_range:
        vals += [row["range_pfa_ratio_min"], row["range_pfa_ratio_max"]]
    return all(abs(v - 1.0) <= cfg.pfa_tolerance for v in vals)


def _plot_pareto(result: StudyResult, path: Path) -> None:
    cfg = result.config
    plt, fig, axs = _panels(1)
    ax = axs[0]
    allx = [_cost(r) for r in result.rows]
    ax.scatter(allx, _finite([_worst_loss(r, cfg) for r in result.rows]), s=12, color="0.75",
               label="every point (worst loss)")
    loose, front = _pareto_rows(result)
    if loose:
        ax.scatter([_cost(r) for r in loose], [_worst_loss(r, cfg) for r in loose], s=18, color="tab:blue",
                   label="Pfa within budget")
    else:  # no point keeps its Pfa: show the front of all points, said so in the legend
        finite = [r for r in result.rows if math.isfinite(_worst_loss(r, cfg))]
        ids = set(pareto_front([(_cost(r), _worst_loss(r, cfg), r["index"]) for r in finite]))
        allf = sorted((r for r in finite if r["index"] in ids), key=lambda r: (_cost(r), r["index"]))
        if allf:
            ax.plot([_cost(r) for r in allf], [_worst_loss(r, cfg) for r in allf], marker="o", color="0.4",
                    drawstyle="steps-post", label="Pareto front of all points (none keeps its Pfa in budget)")
    if front:
        ax.plot([_cost(r) for r in front], [_worst_loss(r, cfg) for r in front], marker="o", color="tab:red",
                drawstyle="steps-post", label="Pareto front (Pfa within budget)")
        for r in front:
            ax.annotate(f"#{r['index']}", (_cost(r), _worst_loss(r, cfg)), fontsize=7, xytext=(3, 3),
                        textcoords="offset points")
    if result.recommended is not None:
        r = result.rows[result.recommended]
        ax.scatter([_cost(r)], [_worst_loss(r, cfg)], s=120, facecolors="none", edgecolors="k",
                   label=f"recommended #{r['index']}")
    ax.axhline(cfg.max_loss_db, color="k", linestyle="--", linewidth=1, label=f"loss budget {cfg.max_loss_db:g} dB")
    ax.set_xlabel(_cost_name(result) + (f", Yosys {result.area_info.get('flow')}" if result.area_info else ""))
    ylabel = f"worst quantisation loss at Pd = {cfg.pd:g} (dB)"
    losses = [v for v in (_worst_loss(r, cfg) for r in result.rows) if math.isfinite(v)]
    keep = [_worst_loss(r, cfg) for r in loose] or losses
    if keep and losses:
        top = max(4 * cfg.max_loss_db, 1.15 * max(keep))
        if max(losses) > top:  # far-off points would squash the front: cut them and say so
            ax.set_ylim(min(0.0, min(losses)) - 0.05 * top, top)
            ylabel += "\n(points above the frame are cut)"
    ax.set_ylabel(ylabel)
    ax.grid(True, alpha=0.3)
    _finish(fig, [ax], path, "Loss against area\n" + _spec_title(result))


def _plot_pd(result: StudyResult, path: Path, ref: dict, cheap: dict) -> None:
    cfg, spec = result.config, result.spec
    plt, fig, axs = _panels(len(cfg.swerling))
    for ax, sw in zip(axs, cfg.swerling):
        grid = result.curves[ref["index"]]["snr_db"]
        flt = [td.pd(spec.kind, spec.n_ref, spec.alpha, x, sw, spec.rank) for x in grid]
        ax.plot(grid, flt, color="k", label=f"float design (Pfa {cfg.design_pfa:.3g})")
        ax.plot(grid, result.curves[ref["index"]][f"pd_sw{sw}"], linestyle="--",
                label=f"pipeline, reference point #{ref['index']} (Pfa {ref['pfa_exact']:.2g})")
        if cheap["index"] != ref["index"]:
            ax.plot(grid, result.curves[cheap["index"]][f"pd_sw{sw}"], linestyle=":",
                    label=f"pipeline, cheapest point #{cheap['index']} (Pfa {cheap['pfa_exact']:.2g})")
        ax.axhline(cfg.pd, color="0.5", linewidth=0.8)
        ax.set_xlabel("SNR per cell (dB)")
        ax.set_ylabel("probability of detection Pd")
        ax.set_title(_SW_NAME[sw])
        ax.set_ylim(0, 1)
        ax.grid(True, alpha=0.3)
    _finish(fig, axs, path, "Pd against SNR, pipeline against float\n" + _spec_title(result))


def _point_label(r: dict, swept) -> str:
    keys = [a for a in AXES if a in swept] or ["input_bits", "alpha_frac_bits", "threshold_frac_bits"]
    return ", ".join(f"{a} = {r[a]:g}" if isinstance(r[a], float) else f"{a} = {r[a]}" for a in keys)


def _num(v, fmt=".3g") -> str:
    if isinstance(v, float) and not math.isfinite(v):
        return "unreachable" if v > 0 else "n/a"
    return format(v, fmt)


_OUTPUT_SKIP = ("alpha_int", "alpha_int_rounded", "retune_met", "threshold_bits_used", "sum_bits_used")


def _output_columns(result: StudyResult) -> list[str]:
    """Columns that say what a point does (not its settings, its name or its random draws)."""
    cols = []
    for c in result.rows[0]:
        if c in AXES or c in _DESCRIPTIVE or c in _OUTPUT_SKIP or c.startswith(_RANDOM_COLUMNS):
            continue
        cols.append(c)
    return cols


def _same(a, b) -> bool:
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    return a == b


def no_effect_axes(result: StudyResult) -> list[str]:
    """Swept axes along which no output of any point changes (every other axis held fixed).

    Monte Carlo columns are left out (each point draws its own samples), and
    so are the integer constant's representation (``alpha_int``: doubling A
    with one more fraction bit realises the same alpha).
    """
    cols = _output_columns(result)
    out = []
    for axis in result.config.swept:
        others = [a for a in AXES if a != axis]
        groups: dict = {}
        for r in result.rows:
            groups.setdefault(tuple(r[a] for a in others), []).append(r)
        if all(all(_same(g[0][c], r[c]) for r in g[1:] for c in cols) for g in groups.values()):
            out.append(axis)
    return out


def edge_warnings(result: StudyResult) -> list[str]:
    """Where the recommended point (else the point of least loss) sits on the edge of the swept grid."""
    r = reference_row(result)
    rec = result.recommended is not None
    out = []
    for axis in result.config.swept:
        if axis not in INTEGER_AXES and axis != "noise_level_lsb":
            continue
        vals = sorted(v for v in result.config.axes[axis] if not (axis in ("threshold_bits", "sum_bits") and v == 0))
        if len(vals) < 2 or r[axis] not in vals or r[axis] not in (vals[0], vals[-1]):
            continue
        opt = f"`{result.config.fields[axis]}`"
        low = r[axis] == vals[0]
        if axis == "noise_level_lsb":
            out.append(f"the noise level {r[axis]:g} LSB is at the edge of the levels swept: the answer may not "
                       "hold beyond it (give a noise range, `--noise-range`).")
        elif rec and low:
            out.append(f"`{axis}` = {r[axis]} is the smallest value swept: a smaller one was not tried and may "
                       f"meet the budget at less cost (extend {opt} downwards).")
        elif rec:
            out.append(f"`{axis}` = {r[axis]} is the largest value swept: the budget is met only at the edge of "
                       f"the grid; larger values were not tried (extend {opt} upwards).")
        else:
            side, way = ("smallest", "downwards") if low else ("largest", "upwards")
            out.append(f"no point meets the budget, and the point of least loss (#{r['index']}) has `{axis}` = "
                       f"{r[axis]}, the {side} value swept: values beyond it were not tried and may meet it "
                       f"(extend {opt} {way}).")
    return out


#: Steps smaller than these are not counted as changes of direction (Pfa ratio, loss in dB).
MONOTONE_TOL = {"Pfa": 1e-6, "loss": 1e-4}


def _monotone(seq, tol: float) -> bool:
    vals = [v for v in seq if math.isfinite(v)]
    up = all(b >= a - tol for a, b in zip(vals, vals[1:]))
    down = all(b <= a + tol for a, b in zip(vals, vals[1:]))
    return up or down


def non_monotone_notes(result: StudyResult, ref: dict) -> list[str]:
    """Markdown explaining, with the realised alpha, every non-monotone Pfa or loss along an axis through ``ref``."""
    cfg = result.config
    lines = []
    for axis in _plot_axes(result):
        rows = _slice(result, axis, ref)
        if len(rows) < 3:
            continue
        bad = [name for name, key in (("Pfa", lambda r: r["pfa_ratio"]), ("loss", lambda r: _worst_loss(r, cfg)))
               if not _monotone([key(r) for r in rows], MONOTONE_TOL[name])]
        if not bad:
            continue
        lines += [f"{' and '.join(bad)} along `{axis}` (through point #{ref['index']}) "
                  f"{'are' if len(bad) > 1 else 'is'} not monotone. Each "
                  "point rounds the constant A afresh, so the realised threshold factor (alpha) moves up and down "
                  "around the design value; a point whose A rounds alpha up has the lower Pfa (and a larger "
                  "loss), one that rounds it down the higher Pfa:", "",
                  f"| {axis} | A | realised alpha | alpha rel. error | Pfa / design | worst loss (dB) |",
                  "|---|---|---|---|---|---|"]
        lines += [f"| {_fmt(r[axis])} | {r['alpha_int']} | {r['realised_alpha']:.6g} | {r['alpha_rel_err']:+.2e} | "
                  f"{r['pfa_ratio']:.4f} | {_num(_worst_loss(r, cfg), '.4f')} |" for r in rows]
        lines.append("")
    return lines


def _area_text(r: dict) -> str:
    if "area_luteq" not in r:
        return ""
    parts = [f"{r['area_luts']} LUTs", f"{r['area_flip_flops']} flip-flops", f"{r['area_carries']} carries",
             f"{r['area_dsps']} DSPs", f"{r['area_srls']} SRLs", f"{r['area_memory_bits']} memory bits"]
    return f"{r['area_luteq']:.1f} LUT-equivalents ({', '.join(parts)})"


def _summary(result: StudyResult) -> str:
    cfg, spec = result.config, result.spec
    rows = result.rows
    lines = ["# Quantisation study", ""]
    kind = spec.kind + (f", rank {spec.rank}" if spec.rank else "")
    area = result.area_info
    if area is not None:
        w = ", ".join(f"{k} {v:g}" for k, v in area.get("weights", {}).items())
        cost_text = (f"Cost = area in LUT-equivalents from Yosys (`{area.get('flow_command', area.get('flow'))}`, "
                     f"{area.get('yosys', '')}) of the reference core built for each point: the weighted sum of "
                     f"its cells with weights {w} (`docs/quantisation-study.md`); ties: word bits, fewer non-zero "
                     "digits in A, cheaper rounding, smaller loss.")
    else:
        cost_text = ("Cost = input_bits + alpha_frac_bits + threshold_frac_bits (area not costed); ties: fewer "
                     "non-zero digits in A, cheaper rounding, smaller loss.")
    range_text = ""
    if cfg.noise_range:
        range_text = (f" The budget must also hold at every noise level from {cfg.noise_range[0]:g} to "
                      f"{cfg.noise_range[-1]:g} LSB ({len(cfg.noise_range)} levels, geometric steps); the worst "
                      "case counts.")
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
        f"within {cfg.pfa_tolerance:.0%} of the design Pfa, also with the noise 3 dB higher (the CFAR property)."
        + range_text + " " + cost_text,
        "",
        "## Recommendation",
        "",
    ]
    if result.recommended is not None:
        r = rows[result.recommended]
        lines += [
            f"**Point #{r['index']}: {_point_label(r, cfg.swept)}** -- "
            + (f"area {_area_text(r)}; " if "area_luteq" in r else "")
            + f"{r['cost_bits']} word bits (input {r['input_bits']}, alpha fraction {r['alpha_frac_bits']}, threshold "
            f"fraction {r['threshold_frac_bits']}; threshold width {r['threshold_bits_used']}, side sum "
            f"{r['sum_bits_used']}), rounding {r['rounding']}, noise at {r['noise_lsb']:g} LSB.",
            "",
        ]
        if r["constant"] == "retuned":
            lines.append(f"- constant A = {r['alpha_int']} ({r['alpha_nonzero_digits']} non-zero signed digits), "
                         f"**re-tuned** to the exact Pfa ({cfg.retune}); rounding alpha gives A = "
                         f"{r['alpha_int_rounded']}, whose exact Pfa is {r['pfa_ratio_rounded']:.4f} x design. To "
                         f"build it, give the spec `detector.alpha = {r['realised_alpha']!r}` instead of "
                         f"`design_pfa`: that alpha rounds to exactly this A")
        else:
            lines.append(f"- constant A = {r['alpha_int']} ({r['alpha_nonzero_digits']} non-zero signed digits), "
                         "alpha rounded")
        other = [x for x in rows if x["constant"] != r["constant"]
                 and all(x[a] == r[a] for a in AXES if a != "constant")]
        if other:
            o = other[0]
            lines.append(f"- with the constant {o['constant']} instead: A = {o['alpha_int']}, exact Pfa "
                         f"{o['pfa_ratio']:.4f} x design, worst loss {_num(_worst_loss(o, cfg))} dB"
                         + (f", area {o['area_luteq']:g}" if "area_luteq" in o else "")
                         + (", within the budget too" if o["meets_budget"] else ", outside the budget"))
        lines.append(f"- exact Pfa {r['pfa_exact']:.4g} ({r['pfa_ratio']:.4f} x design; realised alpha "
                     f"{r['realised_alpha']:.6g}, {r['alpha_rel_err']:+.2e} from the design)")
        lines += [f"- loss {_num(r[f'loss_sw{sw}_db'])} dB ({_SW_NAME[sw]})" for sw in cfg.swerling]
        if cfg.noise_range:
            lines.append(f"- over the noise range: Pfa {r['range_pfa_ratio_min']:.4f} to "
                         f"{r['range_pfa_ratio_max']:.4f} x design (worst at {r['range_worst_pfa_noise_lsb']:g} LSB), "
                         + ", ".join(f"loss up to {_num(r[f'range_loss_sw{sw}_db'])} dB ({_SW_NAME[sw]}, at "
                                     f"{r[f'range_worst_loss_sw{sw}_noise_lsb']:g} LSB)" for sw in cfg.swerling))
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
    ref = reference_row(result)
    notes = [f"- Axis with no effect on any output: `{a}` (every value gives the same Pfa, Pd, loss"
             + (", area" if area is not None else "") + "; Monte Carlo columns aside)." for a in no_effect_axes(result)]
    notes += [f"- Grid edge: {w}" for w in edge_warnings(result)]
    missed = [x for x in rows if x["constant"] == "retuned" and x["retune_met"] is False]
    if missed:
        notes.append(f"- At {len(missed)} point(s) no constant in the search range reaches the design Pfa "
                     f"({cfg.retune}); the largest one tried is used (`retune_met` = false).")
    lines += ["", "## How firm the answer is", ""]
    lines += notes or ["- No axis without effect, and the recommendation is inside the grid on every swept axis."]
    mono = non_monotone_notes(result, ref)
    if mono:
        lines += [""] + mono
    n_mc = [x for x in rows if x["mc_trials"]]
    agree = sum(1 for x in n_mc if x["mc_agrees"])
    lines += ["", "## Checks", ""]
    if n_mc:
        lines.append(f"The exact Pfa lies inside the {cfg.confidence:.1%} Clopper-Pearson interval of the Monte Carlo "
                     f"count ({n_mc[0]['mc_trials']} windows per point) at {agree} of {len(n_mc)} points "
                     f"(about {len(n_mc) * (1 - cfg.confidence):.2g} misses expected by chance).")
    else:
        lines.append("Monte Carlo was switched off (`mc_trials = 0`).")
    worst_bound = max(x["pfa_exact_err_bound"] / x["pfa_exact"] if x["pfa_exact"] > 0 else 0.0 for x in rows)
    lines.append(f"Largest stated error bound of an exact Pfa, relative: {worst_bound:.2g}.")
    loose, front = _pareto_rows(result)
    lines += ["", "## Pareto front: loss against " + _cost_name(result), ""]
    if front:
        lines.append("Points whose Pfa is within the budget (loss left free) that no other such point beats in both "
                     "cost and worst loss:")
        lines.append("")
        head = ["#"] + [a for a in AXES if a in cfg.swept] + [_cost_name(result), "worst loss (dB)", "Pfa / design",
                                                              "meets"]
        lines.append("| " + " | ".join(head) + " |")
        lines.append("|" + "---|" * len(head))
        for x in front:
            lines.append("| " + " | ".join([str(x["index"])] + [_fmt(x[a]) for a in AXES if a in cfg.swept] + [
                f"{_cost(x):g}", _num(_worst_loss(x, cfg), ".4f"), f"{x['pfa_ratio']:.4f}",
                "yes" if x["meets_budget"] else "no"]) + " |")
    else:
        lines.append("No point has its Pfa within the budget.")
    lines += [
        "",
        "## Definitions",
        "",
        "- *exact Pfa*: the pipeline's false-alarm probability for an interior cell, computed from the exact law of "
        "the quantised, clipped input word (`docs/quantisation-study.md`).",
        "- *float Pfa at realised alpha*: the float formula evaluated at the threshold factor the integer constant A "
        "realises (alpha quantisation alone).",
        "- *constant*: `rounded` rounds alpha * 2^F / D to A (respecting the signed-digit limit); `retuned` picks "
        f"the A whose exact Pfa meets the design Pfa ({cfg.retune}).",
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
    head = ["#"] + [a for a in AXES if a in cfg.swept] + (["area"] if area is not None else []) + [
        "bits", "A", "realised alpha", "Pfa exact / design", "same, noise +3 dB"] + (
        ["Pfa over range / design"] if cfg.noise_range else []) + ["MC Pfa"] + [
        f"worst loss {_SW_NAME[s]} (dB)" for s in cfg.swerling] + ["meets"]
    lines.append("| " + " | ".join(head) + " |")
    lines.append("|" + "---|" * len(head))
    for x in sorted(rows, key=lambda x: (_cost(x), x["cost_bits"], x["index"])):
        losses = [max(x[f"loss_sw{s}_db"], x[f"range_loss_sw{s}_db"]) if cfg.noise_range else x[f"loss_sw{s}_db"]
                  for s in cfg.swerling]
        cells = [str(x["index"])] + [_fmt(x[a]) for a in AXES if a in cfg.swept] + (
            [f"{x['area_luteq']:g}"] if area is not None else []) + [
            str(x["cost_bits"]), str(x["alpha_int"]), f"{x['realised_alpha']:.6g}", f"{x['pfa_ratio']:.4f}",
            f"{x['pfa_ratio_noise_x2']:.4f}"] + (
            [f"{x['range_pfa_ratio_min']:.3f}..{x['range_pfa_ratio_max']:.3f}"] if cfg.noise_range else []) + [
            f"{x['mc_pfa']:.3g}" if x["mc_trials"] else "-"] + [
            _num(v, ".4f") for v in losses] + ["yes" if x["meets_budget"] else "no"]
        lines.append("| " + " | ".join(cells) + " |")
    lines += [
        "",
        "## Plots",
        "",
        "![Loss against area, Pareto front](pareto.png)",
        "",
        "![Quantisation loss against word width](loss_vs_width.png)",
        "",
        "![Realised Pfa over the design Pfa against word width](pfa_vs_width.png)",
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
        _plot_pareto(result, tmp / "pareto.png")
        (tmp / "summary.md").write_text(_summary(result), encoding="utf-8")
        meta = {"config": result.config.to_dict(), "recommended": result.recommended,
                "reference_point": ref["index"], "float_snr_db": {str(k): v for k, v in result.float_snr_db.items()},
                "area": result.area_info, "no_effect_axes": no_effect_axes(result),
                "grid_edge_warnings": edge_warnings(result),
                "spec": result.spec.to_dict()}
        (tmp / "study.json").write_text(json.dumps(meta, indent=2, default=str), encoding="utf-8")
    return target

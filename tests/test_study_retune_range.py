"""Issue 14: the re-tuned constant, the noise range, the new axes, the honest summary, the area hand-over.

Outside checks: the signed-digit search against a scan of every integer's
non-adjacent form (Reitwiesner, "Binary arithmetic", 1960: the NAF weight is
the fewest signed digits); the re-tuned constant's Pfa against a Monte Carlo
of the pipeline written out here in numpy (docs/bit-true.md sections 3 to 7,
transcribed by hand) with a Clopper-Pearson interval (Clopper & Pearson,
Biometrika 26, 1934, via the beta quantiles of scipy.stats.beta); the
worst case over the noise range against trigger laws evaluated level by
level at numpy.geomspace levels.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from scipy import stats

from cfarvec.cli import main
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.exact_pfa import trigger_law
from refmodel.fixedpoint.fixed_arith import naf_digits
from refmodel.study import quant_study as qs
from refmodel.study.retune import next_allowed, retune_constant
from refmodel.study.study_report import edge_warnings, no_effect_axes, non_monotone_notes, reference_row, write_report

@pytest.fixture(autouse=True)
def _area_cache(tmp_path_factory, monkeypatch):
    """Synthesis results go to a test cache, never to the user's (hdl_tb.area_cost.CACHE_ENV)."""
    monkeypatch.setenv("CFARVEC_AREA_CACHE", str(tmp_path_factory.getbasetemp() / "area-cache"))


DET = {"kind": "ca", "ref_cells_per_side": 4, "guard_cells_per_side": 1, "design_pfa": 1e-3}


def _spec(**fixed):
    return spec_from_dict({"detector": dict(DET), "fixed": {"input_bits": 8, "alpha_frac_bits": 10, **fixed}})


def _with_a(a, **fixed):
    """The block with constant A = a, built directly: alpha = A * D / 2^F_A (docs/bit-true.md section 4)."""
    det = {k: v for k, v in DET.items() if k != "design_pfa"}
    return spec_from_dict({"detector": {**det, "alpha": a * 8 / 2**10},
                           "fixed": {"input_bits": 8, "alpha_frac_bits": 10, **fixed}})


@pytest.mark.parametrize("digits", [1, 2, 3])
def test_next_allowed_constant_matches_a_scan_of_naf_weights(digits):
    allowed = [a for a in range(1, 9000) if len(naf_digits(a)) <= digits]
    for x in range(1, 3000):
        assert next_allowed(x, digits, up=True) == min(a for a in allowed if a >= x)
        assert next_allowed(x, digits, up=False) == max(a for a in allowed if a <= x)


def test_retuned_constant_is_the_smallest_whose_exact_pfa_is_not_above_the_design():
    """Noise at 4 LSB of an 8-bit word: the floor quantiser raises the Pfa of the rounded A far above design."""
    spec = _spec()
    r = retune_constant(spec, spec.to_dict(resolved=True), 4.0, 1e-3, "closest-not-above")
    assert r.alpha_int_rounded == spec.alpha_int and r.alpha_int > r.alpha_int_rounded
    assert trigger_law(_with_a(r.alpha_int), 4.0).pfa() <= 1e-3 < trigger_law(_with_a(r.alpha_int - 1), 4.0).pfa()
    assert r.pfa_rounded > 2e-3 and r.met
    c = retune_constant(spec, spec.to_dict(resolved=True), 4.0, 1e-3, "closest")
    near = [abs(trigger_law(_with_a(a), 4.0).pfa() / 1e-3 - 1) for a in (r.alpha_int - 1, r.alpha_int)]
    assert abs(c.pfa / 1e-3 - 1) == pytest.approx(min(near), rel=1e-9)


def test_retuned_constant_respects_the_signed_digit_limit():
    spec = _spec(alpha_csd_digits=2)
    r = retune_constant(spec, spec.to_dict(resolved=True), 4.0, 1e-3, "closest-not-above")
    assert len(naf_digits(r.alpha_int)) <= 2
    assert r.pfa <= 1e-3
    # The allowed constant just below it has a Pfa above the design.
    below = next_allowed(r.alpha_int - 1, 2, up=False)
    assert trigger_law(_with_a(below, alpha_csd_digits=2), 4.0).pfa() > 1e-3


def _mc_false_alarms(a: int, noise: float, n: int, seed: int) -> int:
    """The CA pipeline of docs/bit-true.md by hand: floor-and-clip words, S = sum of 2R = 8 words,
    T = floor((S A + 2^(d-1)) / 2^d) (half-up, d = 10), detect when CUT > T (F_T = 0, compare ">")."""
    rng = np.random.default_rng(seed)
    hits = 0
    for _ in range(n // 250_000):
        y = rng.exponential(noise, size=(250_000, 9))
        x = np.minimum(np.floor(y), 255).astype(np.int64)
        s = x[:, 1:].sum(axis=1)
        t = (s * a + (1 << 9)) >> 10
        hits += int(np.count_nonzero(x[:, 0] > t))
    return hits


def test_retuned_constant_meets_the_design_pfa_by_monte_carlo():
    """2,000,000 windows, 99.9 % Clopper-Pearson interval from beta quantiles.

    The re-tuned constant's count is consistent with the design Pfa 1e-3; the rounded constant's is not.
    """
    spec = _spec()
    r = retune_constant(spec, spec.to_dict(resolved=True), 4.0, 1e-3, "closest-not-above")
    n, conf = 2_000_000, 0.999

    def interval(k):
        q = (1 - conf) / 2
        return stats.beta.ppf(q, k, n - k + 1), stats.beta.ppf(1 - q, k + 1, n - k)

    lo, hi = interval(_mc_false_alarms(r.alpha_int, 4.0, n, 7))
    assert lo <= 1e-3 <= hi and lo <= r.pfa <= hi
    lo0, hi0 = interval(_mc_false_alarms(r.alpha_int_rounded, 4.0, n, 8))
    assert lo0 > 1e-3 and lo0 <= r.pfa_rounded <= hi0


def _study(options, spec=None, **kw):
    spec = spec or spec_from_dict({"detector": dict(DET), "fixed": {"input_bits": 12, "alpha_frac_bits": 10}})
    cfg = qs.study_config(spec, {"mc_trials": 0, "snr_db": "13", "swerling": "1", **options})
    return qs.run_study(spec, cfg, workers=1, progress=False, **kw)


def test_retuned_rows_carry_the_rounded_constant_beside_them():
    res = _study({"input_bits": "8", "noise_level_lsb": "64"})  # 8-bit word: noise at 4 LSB (track)
    rounded, retuned = res.rows
    assert (rounded["constant"], retuned["constant"]) == ("rounded", "retuned")
    assert retuned["alpha_int_rounded"] == rounded["alpha_int"] and retuned["alpha_int"] != rounded["alpha_int"]
    assert retuned["pfa_ratio_rounded"] == pytest.approx(rounded["pfa_ratio"], rel=1e-9)
    assert retuned["pfa_ratio"] <= 1 and abs(retuned["pfa_ratio"] - 1) < abs(rounded["pfa_ratio"] - 1)


def test_noise_range_worst_case_and_budget():
    """Worst case over numpy.geomspace(32, 128, 3) levels, each evaluated here by its own trigger law."""
    res = _study({"noise_level_lsb": "64", "noise_range_lsb": "32:128", "noise_range_points": "3",
                  "constant": "rounded", "input_bits": "10,12", "pfa_tolerance": "0.3", "max_loss_db": "0.3"})
    for r in res.rows:
        spec = spec_from_dict(res.specs_data[r["index"]])
        scale = 2.0 ** (r["input_bits"] - 12)
        ratios = [trigger_law(spec, lv * scale, pfa_hint=1e-6).pfa() / 1e-3 for lv in np.geomspace(32, 128, 3)]
        assert r["range_pfa_ratio_max"] == pytest.approx(max(ratios), rel=1e-12)
        assert r["range_pfa_ratio_min"] == pytest.approx(min(ratios), rel=1e-12)
        in_range = (all(abs(x - 1) <= 0.3 for x in ratios) and r["range_loss_sw1_db"] <= 0.3)
        nominal = (r["loss_sw1_db"] <= 0.3 and abs(r["pfa_ratio"] - 1) <= 0.3 and abs(r["pfa_ratio_noise_x2"] - 1)
                   <= 0.3)
        assert r["meets_budget"] == (in_range and nominal)


def test_noise_range_needs_lo_below_hi():
    spec = _spec()
    for bad in ("128:32", "64", "0:8"):
        with pytest.raises(SpecError) as exc:
            qs.study_config(spec, {"noise_range_lsb": bad})
        assert exc.value.field == "--noise-range"


def test_width_axes_and_no_effect_flag(tmp_path):
    """A side sum wider than the automatic one changes nothing the pipeline does (docs/bit-true.md section 3:
    the sum is exact at the automatic width); one signed digit caps A at a power of two, so more fraction
    bits double A and change nothing either (the issue's example)."""
    res = _study({"constant": "rounded", "alpha_frac_bits": "3:6", "alpha_csd_digits": "1", "sum_bits": "0,24",
                  "noise_level_lsb": "64"})
    assert {r["sum_bits_used"] for r in res.rows} == {14, 24}
    assert sorted(no_effect_axes(res)) == ["alpha_frac_bits", "sum_bits"]
    write_report(res, tmp_path / "r")
    text = (tmp_path / "r" / "summary.md").read_text()
    assert "Axis with no effect on any output: `sum_bits`" in text
    # A narrower threshold saturates and so does change the Pfa.
    res = _study({"constant": "rounded", "threshold_bits": "0,6", "noise_level_lsb": "64"})
    assert res.rows[1]["threshold_bits_used"] == 6 and res.rows[1]["saturation_rate"] > 0
    assert no_effect_axes(res) == []


def test_too_narrow_side_sum_names_the_option():
    spec = spec_from_dict({"detector": dict(DET), "fixed": {"input_bits": 12, "alpha_frac_bits": 10}})
    cfg = qs.study_config(spec, {"sum_bits": "10"})
    with pytest.raises(SpecError) as exc:
        qs.sweep_points(spec, cfg)
    assert exc.value.field == "--sum-bits"


def test_edge_warning_and_non_monotone_explanation():
    """F_A = 1..6 at noise 64 LSB: A rounds alpha (about 10.97, Finn & Johnson for N = 8) to 12, 10, 11, ...,
    so the Pfa goes down, up, down; the cheapest point in budget is F_A = 1, the smallest value swept."""
    res = _study({"constant": "rounded", "alpha_frac_bits": "1:6", "noise_level_lsb": "64", "pfa_tolerance": "0.5",
                  "max_loss_db": "0.5"})
    rec = res.rows[res.recommended]
    assert rec["alpha_frac_bits"] == 1 and rec["realised_alpha"] == 12.0
    assert any("`alpha_frac_bits` = 1 is the smallest value swept" in w for w in edge_warnings(res))
    notes = "\n".join(non_monotone_notes(res, reference_row(res)))
    assert "not monotone" in notes and "| 2 | 5 | 10 |" in notes


def test_recommendation_follows_the_area_callable():
    """The study ranks by the `area_luteq` column the caller supplies (here wider words cost less)."""
    def area(specs):
        return [{"area_luteq": 100.0 - s.input_bits} for s in specs]

    res = _study({"constant": "rounded", "input_bits": "10,12,14", "noise_level_lsb": "64", "pfa_tolerance": "0.5",
                  "max_loss_db": "0.5"}, area=area)
    ok = [r for r in res.rows if r["meets_budget"]]
    assert len(ok) >= 2
    assert res.rows[res.recommended]["input_bits"] == max(r["input_bits"] for r in ok)
    plain = _study({"constant": "rounded", "input_bits": "10,12,14", "noise_level_lsb": "64", "pfa_tolerance": "0.5",
                    "max_loss_db": "0.5"})
    assert plain.rows[plain.recommended]["input_bits"] == min(r["input_bits"] for r in ok)


SPEC = """\
# Invented test block (not a real system).
[detector]
kind = "ca"
ref_cells_per_side = 4
guard_cells_per_side = 1
design_pfa = 1e-3

[fixed]
input_bits = 12
alpha_frac_bits = 10

[study]
noise_level_lsb = 64
mc_trials = 0
snr_db = [13]
swerling = [1]
"""


def _run(capsys, argv):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


def test_cli_no_area_writes_pareto_by_word_bits(tmp_path, capsys):
    spec = tmp_path / "b.toml"
    spec.write_text(SPEC, encoding="utf-8")
    out = tmp_path / "r"
    code, stdout, err = _run(capsys, ["study", str(spec), "-o", str(out), "--no-area", "--no-progress", "--workers",
                                      "1", "--input-bits", "10,12", "--noise-range", "32:128",
                                      "--noise-range-points", "2"])
    assert code == 0, err
    text = (out / "summary.md").read_text()
    assert "## Pareto front: loss against cost (word bits)" in text and "](pareto.png)" in text
    assert (out / "pareto.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    with open(out / "points.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert "area_luteq" not in rows[0] and "range_pfa_ratio_max" in rows[0]


@pytest.mark.parametrize("extra,field", [
    (["--area-weights", "lut=x"], "--area-weights"),
    (["--noise-range", "9:3"], "--noise-range"),
    (["--constant", "exact"], "--constant"),
    (["--threshold-bits", "-1"], "--threshold-bits"),
    (["--alpha-frac-bits", "0"], "--alpha-frac-bits"),
])
def test_cli_bad_new_options_one_line_exit_2(tmp_path, capsys, extra, field):
    spec = tmp_path / "b.toml"
    spec.write_text(SPEC.replace("1e-3", "0.1"), encoding="utf-8")
    out = tmp_path / "r"
    code, _, err = _run(capsys, ["study", str(spec), "-o", str(out), "--no-progress", *extra])
    assert code == 2 and err.count("\n") == 1 and err.startswith(f"cfarvec study: error: {field}"), err
    assert not out.exists()


def test_design_retune_constant_matches_the_study(tmp_path, capsys):
    spec = tmp_path / "b.toml"
    spec.write_text(SPEC.replace("input_bits = 12", "input_bits = 8").replace("noise_level_lsb = 64",
                                                                               "noise_level_lsb = 4"),
                    encoding="utf-8")
    code, out, err = _run(capsys, ["design", "--spec", str(spec), "--retune-constant", "closest-not-above",
                                   "--json"])
    assert code == 0, err
    t = json.loads(out)["fixed"]["retuned"]
    ref = retune_constant(_spec(), _spec().to_dict(resolved=True), 4.0, 1e-3, "closest-not-above")
    assert t["alpha_int"] == ref.alpha_int and t["rounded_alpha_int"] == ref.alpha_int_rounded
    assert t["exact_pfa"] <= 1e-3 and t["met"]
    code, out, err = _run(capsys, ["design", "--spec", str(spec), "--retune-constant", "closest"])
    assert code == 0 and "re-tuned A" in out
    code, _, err = _run(capsys, ["design", "--pfa", "1e-3", "--ref-cells-total", "8", "--retune-constant",
                                 "closest"])
    assert code == 2 and err.count("\n") == 1 and "--retune-constant" in err


# --------------------------------------------------------------------------
# Input converter: floor against round to nearest
# --------------------------------------------------------------------------


def test_round_converter_words_by_hand():
    """x = min(floor(y + 1/2), 2^W - 1), ties up (worked by hand for W = 8)."""
    from refmodel.fixedpoint.input_quantiser import quantise_power

    y = np.array([0.0, 0.49, 0.5, 1.5, 2.49, 254.5, 254.4, 300.0])
    assert quantise_power(y, 8, converter="round").tolist() == [0, 0, 1, 2, 2, 255, 254, 255]
    assert quantise_power(y, 8).tolist() == [0, 0, 0, 1, 2, 254, 254, 255]


@pytest.mark.parametrize("m", [0.3, 4.0, 50.0])
def test_round_converter_word_law_against_scipy(m):
    """P(x = 0) = F(1/2), P(x = k) = G(k - 1/2) - G(k + 1/2), P(x = top) = G(top - 1/2), with F and G = 1 - F
    the exponential cdf and survival function (scipy.stats.expon; differences of G keep the tail accurate)."""
    from refmodel.fixedpoint.input_quantiser import noise_cdf, noise_pmf, word_sf

    top = 255
    k = np.arange(top + 1)
    want = stats.expon.sf(k - 0.5, scale=m) - stats.expon.sf(k + 0.5, scale=m)
    want[0] = stats.expon.cdf(0.5, scale=m)
    want[-1] = stats.expon.sf(top - 0.5, scale=m)
    got, dropped = noise_pmf(m, 8, converter="round")
    assert dropped == 0.0
    np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-300)
    cdf, sf = noise_cdf(m, 8, converter="round")
    np.testing.assert_allclose(cdf[:-1], stats.expon.cdf(k[:-1] + 0.5, scale=m), rtol=1e-12)
    np.testing.assert_allclose(word_sf(k[1:], m, 8, converter="round"), stats.expon.sf(k[1:] - 0.5, scale=m),
                               rtol=1e-12)


def test_round_converter_pfa_by_monte_carlo():
    """Noise at 4 LSB: the exact Pfa with the round converter lies in a 99.9 % Clopper-Pearson interval of a
    hand-written Monte Carlo (2,000,000 windows; same pipeline as above but words floor(y + 1/2)), and it is
    far closer to the design than the floor converter's (which the interval of the floor words confirms)."""
    spec = _spec()
    law = trigger_law(spec, 4.0, converter="round")
    rng = np.random.default_rng(11)
    n, hits = 2_000_000, 0
    a = spec.alpha_int
    for _ in range(n // 250_000):
        x = np.minimum(np.floor(rng.exponential(4.0, size=(250_000, 9)) + 0.5), 255).astype(np.int64)
        t = (x[:, 1:].sum(axis=1) * a + (1 << 9)) >> 10
        hits += int(np.count_nonzero(x[:, 0] > t))
    lo = stats.beta.ppf(0.0005, hits, n - hits + 1)
    hi = stats.beta.ppf(0.9995, hits + 1, n - hits)
    assert lo <= law.pfa() <= hi
    assert abs(law.pfa() / 1e-3 - 1) < 0.1 < abs(trigger_law(spec, 4.0).pfa() / 1e-3 - 1)


def test_converter_axis_in_the_study():
    res = _study({"input_bits": "8", "noise_level_lsb": "64", "input_converter": "floor,round",
                  "constant": "rounded", "mc_trials": "20000"})
    floor, rnd = res.rows
    assert (floor["input_converter"], rnd["input_converter"]) == ("floor", "round")
    assert abs(rnd["pfa_ratio"] - 1) < abs(floor["pfa_ratio"] - 1) and rnd["loss_sw1_db"] < floor["loss_sw1_db"]
    assert floor["mc_agrees"] and rnd["mc_agrees"]
    with pytest.raises(SpecError) as exc:
        qs.study_config(_spec(), {"input_converter": "ceil"})
    assert exc.value.field == "--input-converter"


def test_the_alpha_the_summary_gives_for_a_retuned_point_rebuilds_its_constant():
    """A block written with detector.alpha = the realised alpha of a re-tuned point has that point's A
    (docs/bit-true.md section 4: A = round(alpha * 2^F_A / D))."""
    res = _study({"input_bits": "8", "noise_level_lsb": "64", "constant": "retuned"})
    r = res.rows[0]
    import tomllib

    text = (f"[detector]\nkind = 'ca'\nref_cells_per_side = 4\nguard_cells_per_side = 1\n"
            f"alpha = {r['realised_alpha']!r}\n[fixed]\ninput_bits = 8\nalpha_frac_bits = 10\n")
    spec = spec_from_dict(tomllib.loads(text))
    assert spec.alpha_int == r["alpha_int"] != r["alpha_int_rounded"]


def test_map_block_is_costed_on_the_map_core(tmp_path, capsys):
    """The study of a map block runs on its 1D twin, but its area is the map core's, not the twin's core: the
    point at the spec's own arithmetic costs what `cfarvec synth` reports for the spec (cfar_map)."""
    import csv
    import json

    p = tmp_path / "m.toml"
    p.write_text("[detector]\nkind='ca'\ndesign_pfa=1e-3\n[fixed]\ninput_bits=10\nalpha_frac_bits=12\n"
                 "[map]\nrange_cells=32\ndoppler_bins=16\nref_range=2\nref_doppler=1\nguard_range=1\n"
                 "[study]\nmc_trials=0\nsnr_db=[13]\nswerling=[1]\nconstant='rounded'\n", encoding="utf-8")
    code, _, err = _run(capsys, ["study", str(p), "-o", str(tmp_path / "st"), "--workers", "1", "--no-progress",
                                 "--input-bits", "10", "--alpha-frac-bits", "12", "--area-cache",
                                 str(tmp_path / "cache")])
    assert code == 0, err
    rows = list(csv.DictReader((tmp_path / "st" / "points.csv").open()))
    own = [r for r in rows if r["threshold_frac_bits"] == "0" and r["rounding"] == "half-up"]
    assert own, rows
    code, out, err = _run(capsys, ["synth", str(p), "--flow", "ice40", "--json"])
    assert code == 0, err
    direct = json.loads(out)
    assert direct["top"] == "cfar_map"
    for key in ("luts", "flip_flops", "carries", "brams", "memory_bits"):
        assert int(own[0][f"area_{key}"]) == direct[key], key


def test_issue14_plots_integer_ticks_legend_outside_ratio_axis(tmp_path, monkeypatch):
    """Issue 14 item 5: integer ticks on integer axes, legends outside the data, the Pfa as a ratio on a
    linear axis with the tolerance band, titles that name the spec and the budget."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    figs = []
    monkeypatch.setattr(plt, "close", lambda fig=None: figs.append(fig))
    res = _study({"constant": "rounded", "input_bits": "9:12", "noise_level_lsb": "64"})
    write_report(res, tmp_path / "r")
    by_title = {f._suptitle.get_text().splitlines()[0]: f for f in figs if f is not None and f._suptitle}
    loss = by_title["Quantisation loss (extra SNR over the float detector at the same Pfa)"]
    pfa = by_title["Realised false-alarm probability over the design value"]
    for fig in (loss, pfa):
        ax = fig.axes[0]
        fig.canvas.draw()
        lo, hi = ax.get_xlim()
        ticks = [t for t in ax.get_xticks() if lo <= t <= hi]
        assert ticks and all(float(t).is_integer() for t in ticks)
        assert ax.get_legend() is None and len(fig.legends) == 1
        leg = fig.legends[0].get_window_extent()
        assert not leg.overlaps(ax.get_window_extent())
        assert "budget loss <= 0.1 dB, Pfa within 10%" in fig._suptitle.get_text()
    ax = pfa.axes[0]
    assert ax.get_yscale() == "linear"
    band = [p for p in ax.patches if abs(p.get_y() - 0.9) < 1e-12 and abs(p.get_height() - 0.2) < 1e-12]
    assert band  # the tolerance band 1 +- 0.1 of the ratio


def test_edge_warning_when_no_point_meets_the_budget():
    """Finer words lose less (common practice, no source): with a budget of 0 dB nothing meets it, and the
    point of least loss is at the widest input swept, which the summary must say."""
    res = _study({"constant": "rounded", "input_bits": "8,10", "noise_level_lsb": "64", "max_loss_db": "0"})
    assert res.recommended is None
    warn = edge_warnings(res)
    assert len(warn) == 1 and "`input_bits` = 10, the largest value swept" in warn[0]


def test_area_settings_from_the_study_section(tmp_path, capsys):
    spec = tmp_path / "b.toml"
    spec.write_text(SPEC + "area_flow = 'xilinx'\narea_weights = { dsp = 40 }\n", encoding="utf-8")
    from refmodel.block_spec import load_spec

    cfg = qs.study_config(load_spec(spec))
    assert cfg.area_flow == "xilinx" and cfg.area_weights == {"dsp": 40}
    assert qs.study_config(load_spec(spec), {"area_flow": "ice40"}).area_flow == "ice40"
    spec.write_text(SPEC + "area_weights = { dsps = 40 }\n", encoding="utf-8")
    code, _, err = _run(capsys, ["study", str(spec), "-o", str(tmp_path / "r"), "--no-progress"])
    assert code == 2 and err.count("\n") == 1 and err.startswith("cfarvec study: error: study.area_weights"), err
    spec.write_text(SPEC + "area_flow = 'asic'\n", encoding="utf-8")
    code, _, err = _run(capsys, ["study", str(spec), "-o", str(tmp_path / "r"), "--no-progress"])
    assert code == 2 and err.startswith("cfarvec study: error: study.area_flow"), err

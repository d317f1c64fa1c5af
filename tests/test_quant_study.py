"""The quantisation study: sweep settings, metrics, recommendation, report, command line, execution.

Sources of the expectations: the float detector's Pd and required SNR from
refmodel.threshold_design (Finn & Johnson 1968; Richards, Fundamentals of
Radar Signal Processing, 2005, ch. 7; Swerling 1960; Marcum 1960), the
budget and cost rules as written in docs/quantisation-study.md, and the
property that finer formats lose less ("common practice, no source").
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest

from cfarvec.cli import main
from refmodel.study import quant_study as qs
from refmodel import threshold_design as td
from refmodel.block_spec import load_spec, spec_from_dict
from refmodel.errors import SpecError
from refmodel.study.study_report import FILES, write_report

SPEC_TOML = """\
# Invented test block (not a real system).
[detector]
kind = "{kind}"
ref_cells_per_side = 4
guard_cells_per_side = 1
design_pfa = {pfa}

[fixed]
input_bits = 16
alpha_frac_bits = 12
threshold_frac_bits = 2
rounding = "half-up"

[study]
noise_level_lsb = 128
mc_trials = 2000
snr_db = [10, 16]
{study}
"""


def write_spec(tmp_path: Path, kind="ca", pfa=1e-4, study="") -> Path:
    p = tmp_path / f"{kind}.toml"
    p.write_text(SPEC_TOML.format(kind=kind, pfa=pfa, study=study), encoding="utf-8")
    return p


@pytest.fixture(autouse=True)
def _area_cache(tmp_path_factory, monkeypatch):
    """Synthesis results go to a test cache, never to the user's (hdl_tb.area_cost.CACHE_ENV)."""
    monkeypatch.setenv("CFARVEC_AREA_CACHE", str(tmp_path_factory.getbasetemp() / "area-cache"))


def run_cli(argv, capsys):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


# --------------------------------------------------------------------------
# Settings
# --------------------------------------------------------------------------


def test_sweep_values_lists_ranges_and_toml(tmp_path):
    """'a:b' and 'a:b:step' are inclusive; lists mix; command line wins over [study]."""
    spec = load_spec(write_spec(tmp_path, study="input_bits = [8, 10]\nrounding = \"floor,half-even\""))
    cfg = qs.study_config(spec)
    assert cfg.axes["input_bits"] == (8, 10)
    assert cfg.axes["rounding"] == ("floor", "half-even")
    assert cfg.axes["alpha_frac_bits"] == (12,)
    cfg = qs.study_config(spec, {"input_bits": "4:8:2,12", "alpha_frac_bits": "10:12"})
    assert cfg.axes["input_bits"] == (4, 6, 8, 12)
    assert cfg.axes["alpha_frac_bits"] == (10, 11, 12)
    # The constant axis runs every point with A rounded and re-tuned unless told otherwise.
    assert cfg.swept == ("input_bits", "alpha_frac_bits", "rounding", "constant")
    assert cfg.axes["constant"] == ("rounded", "retuned")
    assert cfg.design_pfa == 1e-4


@pytest.mark.parametrize(
    "options,field",
    [
        ({"input_bits": ""}, "--input-bits"),
        ({"input_bits": "12:8"}, "--input-bits"),
        ({"input_bits": "0,8"}, "--input-bits"),
        ({"rounding": "nearest"}, "--rounding"),
        ({"noise_level_lsb": "-1"}, "--noise-lsb"),
        ({"max_loss_db": "abc"}, "--max-loss-db"),
        ({"pfa_tolerance": "-0.1"}, "--pfa-tolerance"),
        ({"pd": "1.5"}, "--pd"),
        ({"swerling": "2"}, "--swerling"),
        ({"mc_trials": "many"}, "--mc-trials"),
    ],
)
def test_bad_settings_name_their_option(tmp_path, options, field):
    spec = load_spec(write_spec(tmp_path))
    with pytest.raises(SpecError) as exc:
        qs.study_config(spec, options)
    assert exc.value.field == field


def test_bad_toml_setting_names_study_field(tmp_path):
    spec = load_spec(write_spec(tmp_path, study="alpha_frac_bits = []"))
    with pytest.raises(SpecError, match="empty list") as exc:
        qs.study_config(spec)
    assert exc.value.field == "study.alpha_frac_bits"
    spec = load_spec(write_spec(tmp_path, study="widths = [1]"))
    with pytest.raises(SpecError) as exc:
        qs.study_config(spec)
    assert exc.value.field == "study.widths"


def test_width_too_small_for_the_design_names_the_sweep_field(tmp_path):
    """alpha * 2^F / 2R quantises to 0 at F = 0 (alpha ~ 2.4 for Pfa 0.1, N = 8 by Finn & Johnson): a SpecError."""
    spec = load_spec(write_spec(tmp_path, pfa=0.1))
    assert td.alpha_from_pfa("ca", 8, 0.1) / 8 < 0.5
    cfg = qs.study_config(spec, {"alpha_frac_bits": "0,12"})
    with pytest.raises(SpecError, match="quantises to 0") as exc:
        qs.sweep_points(spec, cfg)
    assert exc.value.field == "--alpha-frac-bits"


def test_issue14_single_alpha_frac_bits_error_names_that_option(tmp_path):
    """Issue 14 item 4: `--alpha-frac-bits 0` (one value, not swept) made an error naming study.input_bits."""
    spec = load_spec(write_spec(tmp_path, pfa=0.1))
    cfg = qs.study_config(spec, {"alpha_frac_bits": "0"})
    with pytest.raises(SpecError, match="quantises to 0") as exc:
        qs.sweep_points(spec, cfg)
    assert exc.value.field == "--alpha-frac-bits"
    # The same value from [study] names the [study] field.
    spec = load_spec(write_spec(tmp_path, pfa=0.1, study="alpha_frac_bits = 0\ninput_bits = [8, 10]"))
    with pytest.raises(SpecError) as exc:
        qs.sweep_points(spec, qs.study_config(spec))
    assert exc.value.field == "study.alpha_frac_bits"


def test_noise_level_tracks_the_input_width(tmp_path):
    """'track': the same analog noise seen through a word 2 bits narrower sits 4 times lower in LSBs."""
    spec = load_spec(write_spec(tmp_path))
    pts = qs.sweep_points(spec, qs.study_config(spec, {"input_bits": "14,16", "constant": "rounded"}))
    assert [p.noise_lsb for p in pts] == [32.0, 128.0]
    pts = qs.sweep_points(spec, qs.study_config(spec, {"input_bits": "14,16", "noise_scaling": "fixed",
                                                       "constant": "rounded"}))
    assert [p.noise_lsb for p in pts] == [128.0, 128.0]


# --------------------------------------------------------------------------
# Metrics
# --------------------------------------------------------------------------


def _study(kind, options, rank=None, workers=1, **kw):
    det = {"kind": kind, "ref_cells_per_side": 4, "guard_cells_per_side": 1, "design_pfa": 1e-4}
    if rank:
        det["rank"] = rank
    spec = spec_from_dict({"detector": det, "fixed": {"input_bits": 16, "alpha_frac_bits": 12,
                                                      "threshold_frac_bits": 2}})
    cfg = qs.study_config(spec, {"mc_trials": 0, "constant": "rounded", **options})
    return qs.run_study(spec, cfg, workers=workers, progress=False, **kw)


@pytest.mark.parametrize("kind,rank", [("ca", None), ("go", None), ("os", 6)])
def test_loss_not_negative_and_shrinks_with_width(kind, rank):
    """Finer input words lose less (common practice, no source); the loss is never below 0 beyond 1e-3 dB.

    Noise at 128 LSB of a 16-bit word (27 dB headroom), followed down to
    2 LSB at 10 bits (below about one LSB the detector stops being CFAR: see
    the next test). Exact metrics, so the only noise is the SNR root-finder's
    (1e-6 dB) and the Swerling 0 interpolation (4e-8 in Pd).
    """
    res = _study(kind, {"input_bits": "10:16:2", "noise_level_lsb": "128"}, rank=rank)
    for sw in (0, 1):
        loss = [r[f"loss_sw{sw}_db"] for r in res.rows]
        assert all(v >= -1e-3 for v in loss), loss
        assert all(b <= a + 1e-3 for a, b in zip(loss, loss[1:])), loss
        assert loss[-1] < loss[0] / 4
        assert loss[-1] < 0.2


def test_noise_far_below_one_lsb_is_a_fixed_threshold_not_a_cfar():
    """Noise at 1/8 LSB: almost every reference cell reads 0, the threshold is 0, and any CUT >= 1 LSB fires.

    Then Pfa = P(y >= 1) = exp(-8) (scipy.stats.expon.sf), the Pfa follows
    the noise level (at twice the noise it lies between P(all 8 reference
    words 0) * exp(-4) and exp(-4), the trigger word being at least 1), and the loss against the
    CFAR at the same Pfa is negative (a fixed threshold that knows the noise
    beats CA-CFAR by the CFAR loss: Richards 2005, ch. 7). The budget refuses it.
    """
    from scipy import stats

    res = _study("ca", {"input_bits": "6", "noise_level_lsb": "128", "pfa_tolerance": "100"})
    r = res.rows[0]
    assert r["noise_lsb"] == 0.125
    assert r["pfa_exact"] == pytest.approx(stats.expon.sf(1, scale=0.125), rel=0.01)
    up = stats.expon.sf(1, scale=0.25)
    assert stats.expon.cdf(1, scale=0.25) ** 8 * up <= r["pfa_exact_noise_x2"] <= up
    assert r["loss_sw1_db"] < 0
    assert not r["meets_budget"] and res.recommended is None


def test_float_columns_follow_threshold_design():
    """Float Pd, the float SNR and the realised alpha against the published CA formulas, solved by hand.

    CA, N = 8, Pfa 1e-4 (Finn & Johnson 1968; Richards, Fundamentals of Radar Signal Processing,
    2005, ch. 7): alpha = N (Pfa^(-1/N) - 1); Swerling I: Pd = (1 + alpha / (N (1 + SNR)))^-N,
    so the SNR for Pd = 0.9 is 1 + SNR = alpha / (N (Pd^(-1/N) - 1)).
    """
    res = _study("ca", {"snr_db": "10,16"})
    r = res.rows[0]
    n = 8
    a = n * (1e-4 ** (-1 / n) - 1)
    assert r["pd_float_sw1_10dB"] == pytest.approx((1 + a / (n * 11)) ** -n, rel=1e-12)
    snr = a / (n * (0.9 ** (-1 / n) - 1)) - 1
    # 1e-8 dB: the study's root-finder stops within 1e-9 dB (threshold_design.required_snr_db)
    # plus scipy.optimize.brentq's 2 (xtol + rtol |x|) (scipy documentation).
    assert r["snr_float_sw1_db"] == pytest.approx(10 * math.log10(snr), abs=1e-8)
    # Realised alpha (docs/bit-true.md section 4): A = floor(alpha * 2^12 / 8 + 1/2), alpha_r = A * 8 / 2^12.
    a_int = math.floor(a * 2**12 / n + 0.5)
    assert r["realised_alpha"] == a_int * n / 2**12
    assert r["pfa_float_realised"] == pytest.approx((1 + a_int / 2**12) ** -n, rel=1e-12)
    # At noise m = 2^8 LSB of a 16-bit word the pipeline is close to the float model. Flooring the
    # input lowers the threshold by about (alpha - 1) / 2 LSB relative to the CUT and multiplies the
    # Pfa by about 1 + (alpha - 1) / (2m) = 1 + 16.3 / 512 = 1.03 (first-order derivation,
    # docs/quantisation-study.md; the quantised constant adds under 1e-4): a 10 % band leaves room
    # for the second-order term. The same threshold shift moves the Swerling I Pd,
    # exp(-T / (m (1 + SNR))) averaged over the estimate, by about Pd (alpha - 1) / (2 m (1 + SNR))
    # = 16.3 / (512 * 40.8) = 8e-4 at 16 dB: an absolute 0.01 is over ten times that.
    assert r["pd_fixed_sw1_16dB"] == pytest.approx(r["pd_float_sw1_16dB"], abs=0.01)
    assert abs(r["pfa_ratio"] - 1) < 0.1


def test_unreachable_pd_is_reported_as_infinite_loss():
    """Noise 4096 LSB of a 16-bit word: full scale is 16 noise levels, below alpha ~ 17 (Finn & Johnson, N = 8).

    The threshold then exceeds the largest CUT word in most windows, so Pd = 0.9 is out of reach.
    """
    assert td.alpha_from_pfa("ca", 8, 1e-4) > 16
    res = _study("ca", {"noise_level_lsb": "4096"})
    r = res.rows[0]
    assert math.isinf(r["loss_sw1_db"]) and math.isinf(r["snr_fixed_sw1_db"])
    assert not r["meets_budget"] and res.recommended is None


def test_recommendation_is_the_cheapest_point_within_budget():
    """Budget rule of docs/quantisation-study.md, checked row by row."""
    res = _study("ca", {"input_bits": "8:14:2", "alpha_frac_bits": "6,10", "noise_level_lsb": "256",
                        "max_loss_db": "0.2", "pfa_tolerance": "0.5"})
    cfg = res.config

    def ok(r):
        return (all(r[f"loss_sw{s}_db"] <= 0.2 for s in cfg.swerling) and abs(r["pfa_exact"] / 1e-4 - 1) <= 0.5
                and abs(r["pfa_exact_noise_x2"] / 1e-4 - 1) <= 0.5)

    good = [r for r in res.rows if ok(r)]
    assert good, "the grid should hold a point within this budget"
    best = res.rows[res.recommended]
    assert ok(best) and best["recommended"]
    assert best["cost_bits"] == min(r["cost_bits"] for r in good)
    assert best["cost_bits"] == best["input_bits"] + best["alpha_frac_bits"] + best["threshold_frac_bits"]
    assert sum(r["recommended"] for r in res.rows) == 1


# --------------------------------------------------------------------------
# Execution: local processes and Dask give the same results
# --------------------------------------------------------------------------


def _same_rows(a, b):
    assert len(a) == len(b)
    for x, y in zip(a, b):
        assert x.keys() == y.keys()
        for k in x:
            if isinstance(x[k], float) and math.isnan(x[k]):
                assert math.isnan(y[k]), k
            else:
                assert x[k] == y[k], (k, x[k], y[k])


def test_results_identical_serial_processes_and_dask():
    """Seeded per point (SeedSequence(seed, spawn_key=(index,))): same rows however they ran."""
    distributed = pytest.importorskip("distributed")
    det = {"kind": "go", "ref_cells_per_side": 4, "guard_cells_per_side": 1, "design_pfa": 1e-3}
    spec = spec_from_dict({"detector": det, "fixed": {"input_bits": 10, "alpha_frac_bits": 10}})
    cfg = qs.study_config(spec, {"input_bits": "8,10", "alpha_frac_bits": "8,10", "mc_trials": 20000,
                                 "snr_db": "13", "noise_level_lsb": "16"})
    serial = qs.run_study(spec, cfg, workers=1, progress=False)
    pooled = qs.run_study(spec, cfg, workers=2, progress=False)
    _same_rows(serial.rows, pooled.rows)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as lc:
        on_dask = qs.run_study(spec, cfg, scheduler=lc.scheduler_address, progress=False)
    _same_rows(serial.rows, on_dask.rows)
    assert serial.recommended == on_dask.recommended
    # The Monte Carlo did run, with one stream per point.
    assert len({r["mc_false_alarms"] for r in serial.rows}) > 1
    assert all(r["mc_agrees"] for r in serial.rows)


def test_unreachable_scheduler_is_a_spec_error(monkeypatch):
    monkeypatch.setattr(qs, "DASK_CONNECT_TIMEOUT", "1s")
    spec = spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 2, "design_pfa": 1e-2},
                           "fixed": {"input_bits": 8}})
    cfg = qs.study_config(spec, {"mc_trials": 0})
    with pytest.raises(SpecError) as exc:
        qs.run_study(spec, cfg, scheduler="tcp://127.0.0.1:9", progress=False)
    assert exc.value.field == "--scheduler"


# --------------------------------------------------------------------------
# Report and command line
# --------------------------------------------------------------------------


def test_cli_writes_the_report(tmp_path, capsys):
    spec = write_spec(tmp_path)
    out = tmp_path / "report"
    code, stdout, err = run_cli(["study", str(spec), "-o", str(out), "--input-bits", "8,12", "--workers", "1",
                                 "--no-progress", "--max-loss-db", "0.5", "--pfa-tolerance", "0.5"], capsys)
    assert code == 0, err
    assert sorted(p.name for p in out.iterdir()) == sorted(FILES)
    with open(out / "points.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [int(r["input_bits"]) for r in rows] == [8, 8, 12, 12]
    assert [r["constant"] for r in rows] == ["rounded", "retuned"] * 2
    assert all(float(r["area_luteq"]) > 0 for r in rows)
    assert {"pfa_exact", "mc_ci_low", "mc_ci_high", "loss_sw0_db", "loss_sw1_db", "saturation_rate",
            "clip_rate_noise", "thr_err_total_rms_lsb", "pd_fixed_sw0_10dB", "pd_float_sw1_16dB"} <= set(rows[0])
    summary = (out / "summary.md").read_text()
    for png in ("loss_vs_width.png", "pfa_vs_width.png", "pd_vs_snr.png"):
        assert f"]({png})" in summary
        assert (out / png).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "recommended point" in stdout or "no point of the grid meets the budget" in stdout
    # Nothing left beside the target.
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ca.toml", "report"]


def test_no_point_meets_budget_is_said_plainly(tmp_path):
    spec = load_spec(write_spec(tmp_path))
    cfg = qs.study_config(spec, {"input_bits": "6,8", "max_loss_db": "0", "pfa_tolerance": "0", "mc_trials": 0})
    res = qs.run_study(spec, cfg, workers=1, progress=False)
    assert res.recommended is None
    write_report(res, tmp_path / "r")
    assert "No point of this grid meets the budget." in (tmp_path / "r" / "summary.md").read_text()


@pytest.mark.parametrize(
    "extra,field",
    [
        (["--input-bits", ""], "--input-bits"),
        (["--alpha-frac-bits", "0,12"], "--alpha-frac-bits"),
        (["--max-loss-db", "0.1dB"], "--max-loss-db"),
        (["--pfa-tolerance", "ten percent"], "--pfa-tolerance"),
    ],
)
def test_cli_bad_input_one_line_exit_2_no_folder(tmp_path, capsys, extra, field):
    spec = write_spec(tmp_path, pfa=0.1)
    out = tmp_path / "report"
    code, _, err = run_cli(["study", str(spec), "-o", str(out), "--no-progress", *extra], capsys)
    assert code == 2
    assert err.count("\n") == 1 and err.startswith(f"cfarvec study: error: {field}")
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ca.toml"]


def test_cli_refuses_non_empty_folder_unless_forced(tmp_path, capsys):
    spec = write_spec(tmp_path)
    out = tmp_path / "report"
    out.mkdir()
    (out / "keep.txt").write_text("mine")
    code, _, err = run_cli(["study", str(spec), "-o", str(out), "--no-progress", "--workers", "1"], capsys)
    assert code == 2 and "not empty" in err
    assert (out / "keep.txt").read_text() == "mine"
    code, _, err = run_cli(["study", str(spec), "-o", str(out), "--no-progress", "--workers", "1", "--force",
                            "--mc-trials", "0"], capsys)
    assert code == 0, err
    assert not (out / "keep.txt").exists() and (out / "summary.md").exists()


def test_every_point_seed_is_distinct():
    """Per-point streams from SeedSequence spawn keys (numpy.random.SeedSequence documentation)."""
    a = np.random.default_rng(qs.point_seed(1, 0)).random(4)
    b = np.random.default_rng(qs.point_seed(1, 1)).random(4)
    c = np.random.default_rng(qs.point_seed(1, 0)).random(4)
    assert not np.array_equal(a, b) and np.array_equal(a, c)


@pytest.mark.parametrize("target", [".", ""])
def test_cli_study_output_never_replaces_the_current_folder(tmp_path, capsys, monkeypatch, target):
    """Issue 15 items 2 and 5: `study --output .` (or an empty path) with --force is refused, naming --output."""
    spec = write_spec(tmp_path)
    monkeypatch.chdir(tmp_path)
    code, _, err = run_cli(["study", str(spec), "--output", target, "--force", "--no-progress", "--workers", "1"],
                           capsys)
    assert code == 2 and err.count("\n") == 1 and err.startswith("cfarvec study: error: --output")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ca.toml"]

"""`cfarvec design --spec`: the quantised constant and the Pfa it realises."""

import json
import math

import numpy as np
import pytest
from scipy import stats

from cfarvec.cli import main


def _run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_ca_spec_report_matches_hand_quantisation(capsys, tmp_path):
    spec = tmp_path / "b.toml"
    spec.write_text(
        "[detector]\nkind='ca'\nref_cells_per_side=16\nguard_cells_per_side=2\ndesign_pfa=1e-6\n"
        "[fixed]\ninput_bits=16\nalpha_frac_bits=8\n"
    )
    code, out, _ = _run(capsys, "design", "--spec", str(spec), "--json")
    assert code == 0
    fixed = json.loads(out)["fixed"]
    n = 32
    # CA: alpha = N (Pfa^(-1/N) - 1) (Finn & Johnson 1968; Richards, Fundamentals of
    # Radar Signal Processing, 2005, ch. 7).
    alpha = n * (1e-6 ** (-1 / n) - 1)
    # Quantisation as written in docs/bit-true.md section 4, worked by hand here:
    # A = floor(alpha * 2^F_A / N + 1/2), realised alpha = A * N / 2^F_A.
    a = math.floor(alpha * 2**8 / n + 0.5)
    assert fixed["alpha_int"] == a
    realised = a * n / 2**8
    assert fixed["realised_alpha"] == pytest.approx(realised, rel=1e-12)
    # The float formula at the realised alpha, by the same published CA formula.
    assert fixed["float_pfa_at_realised_alpha"] == pytest.approx((1 + realised / n) ** (-n), rel=1e-9)
    assert fixed["design_pfa"] == pytest.approx(1e-6, rel=1e-12)
    # Side sum holds R (2^W - 1) = 16 * 65535 = 1048560 < 2^20 (docs/bit-true.md section 3).
    assert fixed["side_sum_bits"] == 20


def test_spec_with_detector_options_is_refused(capsys):
    code, _, err = _run(capsys, "design", "--spec", "examples/harbour_ca.toml", "--ref-cells-total", "8")
    assert code == 2
    assert err.count("\n") == 1 and "--ref-cells-total" in err


def test_missing_spec_file_is_one_line(capsys, tmp_path):
    code, _, err = _run(capsys, "design", "--spec", str(tmp_path / "nope.toml"))
    assert code == 2
    assert err.count("\n") == 1 and "SPEC" in err


@pytest.mark.parametrize(
    "body, field",
    [
        ("[detector]\nkind='xx'\nref_cells_per_side=4\nalpha=3\n", "detector.kind"),
        ("[detector]\nref_cells_per_side=4\n", "detector.alpha"),
        ("[detector]\nref_cells_per_side=4\nalpha=3\n[fixed]\nsum_bits=3\n", "fixed.sum_bits"),
        ("[detector]\nref_cells_per_side=4\nalpha=3\n[fixed]\nrounding='up'\n", "fixed.rounding"),
        ("[detector]\nref_cells_per_side=4\nalpha=3\n[fixed]\nwidth=3\n", "fixed.width"),
        ("[detector]\nref_cells_per_side=3\nalpha=3\n[fixed]\nmean_by_shift=true\n", "fixed.mean_by_shift"),
        ("[detector]\nref_cells_per_side=4\nalpha=3\n[stream]\nframe_length=5\n", "stream.frame_length"),
        ("[detector]\nref_cells_per_side=4\nalpha=3e-9\n", "fixed.alpha_frac_bits"),
        ("[detector]\nkind='os'\nref_cells_per_side=4\nalpha=3\n", "detector.rank"),
        ("[detectr]\nref_cells_per_side=4\n", "detectr"),
        ("not toml = = =", "SPEC"),
    ],
)
def test_bad_spec_fields_name_the_field(capsys, tmp_path, body, field):
    spec = tmp_path / "bad.toml"
    spec.write_text(body)
    code, out, err = _run(capsys, "design", "--spec", str(spec))
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and field in err and "allowed" in err


@pytest.mark.parametrize("path", ["examples/harbour_ca.toml", "examples/breakwater_go.toml", "examples/channel_os.toml"])
def test_spec_dict_round_trip(path):
    # A spec written out by to_dict() must load back to the same spec (common practice, no source).
    from refmodel.block_spec import load_spec, spec_from_dict

    spec = load_spec(path)
    again = spec_from_dict(spec.to_dict())
    assert again == spec and again.alpha_int == spec.alpha_int


def test_issue15_exact_pfa_of_the_harbour_pipeline(capsys):
    """Issue 15: design --spec printed only the float formula at the quantised alpha (1.00004e-6) as
    "realised Pfa"; the quantised pipeline of examples/harbour_ca.toml at its study noise level
    (256 LSB) has Pfa 1.0303e-6 (issue 15 text).

    Independent reference, written out here: an interior cell of the pipeline (docs/bit-true.md
    sections 3-7) with cells floor(y), y exponential of mean m = 256 LSB (the input convention of
    docs/quantisation-study.md). Unclipped, such words are geometric and a sum of 2R = 32 of them is
    negative binomial, scipy.stats.nbinom(32, 1 - exp(-1/m)) (N. L. Johnson, A. W. Kemp, S. Kotz,
    "Univariate Discrete Distributions", 3rd ed., Wiley, 2005, ch. 5); clipping at 65535 has
    probability exp(-65535/256) < 1e-100 per cell, far below the tolerance. CA, design Pfa 1e-6:
    alpha = N (Pfa^(-1/N) - 1) (Finn & Johnson 1968); mean_by_shift gives D = 32, s = 5, F_P = 17,
    A = floor(alpha 2^17 / 32 + 1/2); half-up with F_T = 0: T = (S A + 2^16) >> 17 (no saturation
    below S = 32 * 65535); compare ">": the CUT word must reach T + 1, P(floor(y) >= c) = exp(-c/m).
    """
    code, out, _ = _run(capsys, "design", "--spec", "examples/harbour_ca.toml", "--json")
    assert code == 0
    fixed = json.loads(out)["fixed"]
    n, m = 32, 256.0
    alpha = n * (1e-6 ** (-1 / n) - 1)
    a = math.floor(alpha * 2**17 / 32 + 0.5)
    s = np.arange(0, 200_000)  # the nbinom mass beyond 200000 (mean 8192, sd about 1450) is nil
    t = (s * a + 2**16) >> 17
    want = float(np.sum(stats.nbinom.pmf(s, n, -math.expm1(-1.0 / m)) * np.exp(-(t + 1) / m)))
    (entry,) = fixed["exact_pfa"]
    assert entry["noise_lsb"] == m
    assert entry["pfa"] == pytest.approx(want, rel=1e-9)
    assert entry["pfa"] == pytest.approx(1.0303e-6, rel=1e-4)
    assert entry["error_bound"] < 1e-9 * want
    assert fixed["float_pfa_at_realised_alpha"] == pytest.approx(1.00004e-6, rel=1e-5)
    code, text, _ = _run(capsys, "design", "--spec", "examples/harbour_ca.toml")
    assert "float formula at the realised alpha" in text
    assert "exact Pfa         1.030300e-06  (quantised pipeline" in text
    assert "realised Pfa" not in text


def test_issue15_side_sum_reports_the_width_used(capsys, tmp_path):
    """Issue 15: with fixed.sum_bits = 24 the design report said "side sum 20" (the minimum,
    bitlen(16 * 65535), docs/bit-true.md section 3); the running sums are 24 bits wide."""
    spec = tmp_path / "b.toml"
    spec.write_text("[detector]\nkind='ca'\nref_cells_per_side=16\ndesign_pfa=1e-6\n"
                    "[fixed]\ninput_bits=16\nsum_bits=24\n")
    code, out, _ = _run(capsys, "design", "--spec", str(spec), "--json")
    assert code == 0 and json.loads(out)["fixed"]["side_sum_bits"] == 24
    _, text, _ = _run(capsys, "design", "--spec", str(spec))
    assert "side sum 24," in text

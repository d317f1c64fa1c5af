"""`cfarvec design --spec`: the quantised constant and the Pfa it realises."""

import json
import math

import pytest

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
    # Realised Pfa by the same published CA formula.
    assert fixed["realised_pfa"] == pytest.approx((1 + realised / n) ** (-n), rel=1e-9)
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

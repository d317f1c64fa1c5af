"""`cfarvec design --spec` on a map (range-Doppler) spec: N of the window, alpha, Pd, loss, widths, memory."""

from __future__ import annotations

import json
import math

import pytest

from cfarvec.cli import main

EXAMPLE = "examples/lagoon_map_ca.toml"


def _run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_design_of_the_example_map(capsys):
    code, out, _ = _run(capsys, "design", "--spec", EXAMPLE, "--json", "--snr-db", "13")
    assert code == 0
    r = json.loads(out)
    m, fx = r["map"], r["fixed"]
    # Ring of the example, counted by hand: window (2*2+2*1+1) x (2*3+2*1+1) = 7 x 9 = 63 cells,
    # guard rectangle 3 x 3 = 9, N = 54; range halves 7 * 4 - 3 * 1 = 25.
    assert (m["ref_cells"], m["half_cells"], r["ref_cells"]) == (54, 25, 54)
    # CA alpha from Pfa: N (Pfa^(-1/N) - 1) (Finn & Johnson 1968; Richards 2005, sec. 7.3).
    n = 54
    assert r["alpha"] == pytest.approx(n * (1e-6 ** (-1 / n) - 1), rel=1e-10)
    # Swerling I CA: Pd = (1 + alpha / (N (1 + SNR)))^-N (Richards 2005, sec. 7.3, from memory).
    snr = 10 ** 1.3
    sw1 = next(c for c in r["swerling"] if c["swerling"] == 1)
    assert sw1["pd"][0] == pytest.approx((1 + r["alpha"] / (n * (1 + snr))) ** -n, rel=1e-6)
    assert sw1["cfar_loss_db"] > 0
    # Constant A = floor(alpha * 2^14 / N + 1/2) (docs/bit-true.md section 4 with D = N).
    assert fx["alpha_int"] == math.floor(r["alpha"] * 2**14 / n + 0.5)
    assert fx["statistic_bits"] == (n * (2**14 - 1)).bit_length()
    # doppler-fast: Doppler (64 bins, H = 3) is the fast axis, range (H = 4) the slow one.
    p_f = 64 + 2 * 3
    assert m["line_buffer_bits"] == 2 * 4 * p_f * 14
    assert m["store_bits"] == 2 * 64 * 14  # circular Doppler on the fast axis: two line stores
    assert m["latency_cycles"] == 64 + 2 * (4 * p_f + 3) + 2


def test_text_uses_the_2d_words(capsys):
    code, out, _ = _run(capsys, "design", "--spec", EXAMPLE)
    assert code == 0
    assert "reference ring" in out and "guard rectangle" in out and "band" not in out


def test_go_map_design_uses_the_halves(capsys, tmp_path):
    p = tmp_path / "go.toml"
    p.write_text("[detector]\nkind='go'\ndesign_pfa=1e-4\n[map]\nrange_cells=40\ndoppler_bins=16\nref_range=2\n"
                 "ref_doppler=1\nwindow='cross'\n")
    code, out, _ = _run(capsys, "design", "--spec", str(p), "--json")
    assert code == 0
    r = json.loads(out)
    # Cross: halves of Rr = 2 cells; the GO design is over two halves of 2 cells, 4 in all.
    assert (r["map"]["half_cells"], r["ref_cells"]) == (2, 4)


@pytest.mark.parametrize("body, field", [
    ("[detector]\nalpha=3\n[map]\nrange_cells=4\ndoppler_bins=8\nref_range=2\nref_doppler=1\n", "map.range_cells"),
    ("[detector]\nalpha=3\n[map]\nrange_cells=40\ndoppler_bins=8\nref_range=2\nref_doppler=1\norder='x'\n",
     "map.order"),
    ("[detector]\nalpha=3\nedge='skip'\n[map]\nrange_cells=40\ndoppler_bins=8\nref_range=2\nref_doppler=1\n",
     "detector.edge"),
])
def test_bad_map_fields_one_line_exit_2(capsys, tmp_path, body, field):
    p = tmp_path / "bad.toml"
    p.write_text(body)
    code, out, err = _run(capsys, "design", "--spec", str(p))
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and field in err and "allowed" in err

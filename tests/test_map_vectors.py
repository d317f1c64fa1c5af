"""`cfarvec vectors` and `cfarvec check` for map (range-Doppler) specs; the map stimulus sources.

Outside references: the scenario's noise and target statistics against their stated models
(exponential noise, Richards 2005 sec. 6.2; a Swerling 0 target cell |a + n|^2 has mean
|a|^2 + background, common practice, no source) inside a 99.9 % normal interval of the mean; the
directed cases against their written definitions (vectors/map_sources.py).
"""

from __future__ import annotations

import hashlib
import json
import math

import numpy as np
import pytest

from cfarvec.cli import main
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.map_fast import run_map_fast
from vectors.checker import check_vector_set
from vectors.map_sources import MapScenario, MapTarget, corner_case_blocks, hot_cell_positions, ridge_bins, scenario_map
from vectors.vector_set import write_vector_set
from vectors.writers import parse_fixed


def _spec(vectors=None, **mp):
    m = {"range_cells": 24, "doppler_bins": 12, "ref_range": 2, "ref_doppler": 1, "guard_range": 1,
         "guard_doppler": 1, **mp}
    d = {"detector": {"kind": "ca", "design_pfa": 1e-3}, "fixed": {"input_bits": 10, "alpha_frac_bits": 10},
         "map": m, "vectors": {"scenario_maps": 2, "random_maps": 2, "formats": ["hex", "csv"], **(vectors or {})}}
    return spec_from_dict(d)


def _sha(p):
    return hashlib.sha256(p.read_bytes()).hexdigest()


@pytest.mark.parametrize("order", ["doppler-fast", "range-fast"])
def test_set_is_written_and_checks(tmp_path, order):
    spec = _spec(order=order)
    m = write_vector_set(spec, tmp_path / "set")
    assert m["spec"]["map"]["order"] == order
    assert m["derived"]["map_cells"] == 24 * 12 and m["derived"]["ref_cells"] == 5 * 7 - 9
    labels = [c["label"] for c in m["corner_cases"]]
    assert labels == ["all_zero", "all_full_scale", "all_one_lsb", "hot_cells", "doppler_wrap", "ties"]
    assert m["totals"]["samples"] == m["totals"]["frames"] * 24 * 12
    rep = check_vector_set(tmp_path / "set")
    assert rep.ok, rep.summary()


def test_same_seed_same_bytes_and_chunks_do_not_matter(tmp_path):
    a = write_vector_set(_spec(), tmp_path / "a")
    b = write_vector_set(_spec({"chunk_samples": 100}), tmp_path / "b")
    for f in ("stimulus.hex", "expected.hex", "expected.csv"):
        assert _sha(tmp_path / "a" / f) == _sha(tmp_path / "b" / f)
    assert a["files"] == b["files"]


def test_damaged_expected_word_is_found(tmp_path):
    spec = _spec()
    write_vector_set(spec, tmp_path / "s")
    p = tmp_path / "s" / "expected.hex"
    lines = p.read_text().splitlines()
    k = 300  # frame 1 (all_full_scale), index 12
    word = int(lines[k], 16) ^ (1 << spec.input_bits)  # flip the threshold's LSB
    lines[k] = f"{word:0{len(lines[k])}x}"
    p.write_text("\n".join(lines) + "\n")
    rep = check_vector_set(tmp_path / "s")
    assert not rep.ok
    f = rep.findings[0]
    assert (f.file, f.line, f.frame, f.index, f.field) == ("expected.hex", k + 1, 1, k - 288, "threshold")


def test_cli_vectors_and_check(tmp_path, capsys):
    spec_file = tmp_path / "m.toml"
    spec_file.write_text(
        "[detector]\nkind='os'\nrank=5\nalpha=4.0\n[fixed]\ninput_bits=8\n"
        "[map]\nrange_cells=20\ndoppler_bins=10\nref_range=2\nref_doppler=1\nguard_range=1\nwindow='cross'\n"
        "doppler_edge='circular'\nrange_edge='skip'\n"
        "[vectors]\nscenario_maps=1\nrandom_maps=1\n")
    assert main(["vectors", str(spec_file), "-o", str(tmp_path / "v")]) == 0
    assert main(["check", str(tmp_path / "v")]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[-1].startswith("OK")


@pytest.mark.parametrize("vec, field", [
    ({"targets": [{"range_cell": 24, "doppler_bin": 0, "snr_db": 3.0}]}, "vectors.targets[0].range_cell"),
    ({"targets": [{"range_cell": 2, "doppler_bin": 0}]}, "vectors.targets[0].snr_db"),
    ({"targets": [{"range_cell": 2, "doppler_bin": 0, "snr_db": 1, "cell": 3}]}, "vectors.targets[0].cell"),
    ({"scenario_frames": 3}, "vectors.scenario_frames"),
    ({"clutter_width_bins": 13}, "vectors.clutter_width_bins"),
    ({"scenario_maps": 0, "random_maps": 0, "include_corner_cases": False}, "vectors"),
])
def test_bad_vector_fields(tmp_path, vec, field):
    with pytest.raises(SpecError) as exc:
        write_vector_set(_spec(vec), tmp_path / "x")
    assert exc.value.field == field
    assert not (tmp_path / "x").exists()


def test_hot_cells_cover_corners_and_stay_a_window_apart():
    spec = _spec()
    groups = hot_cell_positions(spec)
    cells = {c for g in groups for c in g}
    assert {(0, 0), (0, 23), (11, 0), (11, 23)} <= cells  # every corner (Doppler, range)
    w = spec.window
    for g in groups:
        for i, a in enumerate(g):
            for b in g[i + 1 :]:
                assert abs(a[0] - b[0]) > w.wd or abs(a[1] - b[1]) > w.wr


def test_ties_case_holds_exact_ties():
    # The "ties" map puts CUTs at t = T >> F_T on a constant background: with F_T = 0, every such CUT
    # equals its threshold, so ">" leaves it undetected (docs/bit-true-2d.md section 7).
    spec = _spec()
    block = [b for b in corner_case_blocks(spec) if b.label == "ties"][0]
    out = run_map_fast(spec, block.samples, block.last)
    tie = out.valid & (out.cut == out.threshold)
    assert tie.sum() >= 2 and not out.det[tie].any()


def test_doppler_wrap_case_straddles_bin_zero():
    spec = _spec()
    block = [b for b in corner_case_blocks(spec) if b.label == "doppler_wrap"][0]
    rd = spec.rd_map(block.samples)
    full = (1 << spec.input_bits) - 1
    assert np.all(rd[[0, 11]][:, [0, 12, 23]] == full)


def test_ridge_bins_are_nearest_zero_doppler():
    assert ridge_bins(64, 3).tolist() == [0, 1, 63]
    assert ridge_bins(64, 4).tolist() == [0, 1, 2, 63]
    assert ridge_bins(5, 5).tolist() == [0, 1, 2, 3, 4]


def test_scenario_statistics_follow_the_stated_model():
    spec = spec_from_dict({"detector": {"kind": "ca", "alpha": 5.0}, "fixed": {"input_bits": 16},
                           "map": {"range_cells": 64, "doppler_bins": 32, "ref_range": 2, "ref_doppler": 1}})
    noise, snr_db = 200.0, 10.0
    sc = MapScenario(noise, (MapTarget(10, 16, snr_db),), 10.0, 3, 0)
    rng = np.random.default_rng(5)
    maps = np.array([scenario_map(spec, sc, rng) for _ in range(300)], dtype=float)
    # Noise cells away from the ridge and the target: exponential of mean `noise` (variance noise^2),
    # floored by the quantiser (mean lowered by about 1/2 LSB).
    quiet = maps[:, 8:24, 30:60].ravel()
    half_width = 3.29 * noise / math.sqrt(quiet.size)  # 99.9 % normal interval of the mean
    assert abs(quiet.mean() - (noise - 0.5)) < half_width
    # The ridge (bins 0, 1, 31): mean raised by 10 dB.
    ridge = maps[:, [0, 1, 31], 30:60].ravel()
    assert abs(ridge.mean() / (noise * 10.0) - 1) < 3.29 / math.sqrt(ridge.size) + 1e-3
    # Swerling 0 target cell: |a + n|^2 has mean |a|^2 + noise, standard deviation
    # sqrt(noise^2 + 2 |a|^2 noise) (non-central chi-square with 2 degrees of freedom, from memory).
    a2 = noise * 10 ** (snr_db / 10)
    cell = maps[:, 16, 10]
    sd = math.sqrt(noise**2 + 2 * a2 * noise)
    assert abs(cell.mean() - (a2 + noise - 0.5)) < 3.29 * sd / math.sqrt(cell.size)


def test_manifest_records_the_map_geometry(tmp_path):
    write_vector_set(_spec(), tmp_path / "s")
    m = json.loads((tmp_path / "s" / "manifest.json").read_text())
    d = m["derived"]
    assert (d["slow_axis"], d["fast_axis"]) == ("range", "doppler")
    assert d["padded_line"] == 12 + 2 * 2 and d["line_buffers"] == 2 * 3
    assert d["latency_cycles"] == m["latency_cycles"]
    expected = parse_fixed((tmp_path / "s" / "expected.hex").read_bytes(), "hex", m["words"]["expected"]["bits"])
    assert expected.size == m["totals"]["samples"]

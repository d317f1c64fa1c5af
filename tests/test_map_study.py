"""`cfarvec study` for map (range-Doppler) specs.

A map block is studied as its arithmetic twin (refmodel.map_spec.interior_twin). The reduction is
checked from outside: the exact quantised Pfa of the twin (refmodel.fixedpoint.exact_pfa) against
a Monte Carlo of the 2D fast model itself on quantised exponential noise, counting CUTs one window
apart (disjoint windows, so the count is binomial), inside a 99.9 % Clopper-Pearson interval.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import stats

from cfarvec.cli import main
from refmodel.block_spec import spec_from_dict
from refmodel.fixedpoint.exact_pfa import trigger_law
from refmodel.fixedpoint.input_quantiser import quantise_power
from refmodel.fixedpoint.map_fast import run_map_fast
from refmodel.map_spec import interior_twin


def _spec(kind, shape, **det):
    return spec_from_dict({
        "detector": {"kind": kind, "design_pfa": 1e-2, **det},
        "fixed": {"input_bits": 6, "alpha_frac_bits": 6},
        "map": {"range_cells": 600, "doppler_bins": 200, "order": "range-fast", "window": shape, "ref_range": 2,
                "ref_doppler": 1, "guard_range": 1, "guard_doppler": 0, "range_edge": "zero-pad",
                "doppler_edge": "circular"},
    })


@pytest.mark.parametrize("kind,shape,det", [("ca", "ring", {}), ("go", "ring", {}), ("os", "cross", {"rank": 5})])
def test_exact_pfa_of_the_twin_matches_the_map_model(kind, shape, det):
    spec = _spec(kind, shape, **det)
    noise = 6.0  # a coarse 6-bit word: quantisation matters, so the check is of the quantised pipeline
    pfa = trigger_law(interior_twin(spec), noise).pfa()
    rng = np.random.default_rng(21)
    w = spec.window
    hits = trials = 0
    for _ in range(4):
        rd = quantise_power(rng.exponential(noise, (spec.doppler_bins, spec.range_cells)), spec.input_bits)
        x = spec.stream_cells(rd.astype(np.int64))
        last = np.zeros(x.size, dtype=bool)
        last[-1] = True
        det_map = spec.rd_map(run_map_fast(spec, x, last).det)
        sel = det_map[w.hd : spec.doppler_bins - w.hd : w.wd, w.hr : spec.range_cells - w.hr : w.wr]
        hits += int(sel.sum())
        trials += sel.size
    ci = stats.binomtest(hits, trials).proportion_ci(confidence_level=0.999, method="exact")
    assert ci.low <= pfa <= ci.high, (hits, trials, pfa)


def test_study_cli_on_a_map_spec(tmp_path, capsys):
    p = tmp_path / "m.toml"
    p.write_text("[detector]\nkind='ca'\ndesign_pfa=1e-3\n[fixed]\ninput_bits=10\n"
                 "[map]\nrange_cells=32\ndoppler_bins=16\nref_range=2\nref_doppler=1\nguard_range=1\n"
                 "[study]\nmc_trials=2000\n")
    code = main(["study", str(p), "-o", str(tmp_path / "st"), "--workers", "1", "--no-progress"])
    assert code == 0
    summary = (tmp_path / "st" / "summary.md").read_text()
    assert "map block" in summary
    data = json.loads((tmp_path / "st" / "study.json").read_text())
    assert data  # the report's JSON is written whole

"""Float model against fixed-point words on the scenario frames of a vector set.

The same integer samples go through the float golden model
(:func:`refmodel.floatmodel.float_cfar.cfar_1d`, with the spec's own alpha) and the
bit-accurate model (:mod:`refmodel.fixedpoint.pipeline_fast`). Where their decisions
differ, the CUT must lie within the threshold error bound of the float
threshold: the fixed threshold differs from the float one by at most
``S |A - A_exact| / 2^F_P + r`` (constant quantisation plus product rounding,
``A_exact = alpha 2^F_P / D``, ``r`` one threshold LSB for floor, half for
half-up and half-even, one per NAF digit with truncated partials; the
derivation is written out in ``test_block_spec.threshold_error_bound``, with
D, s and A derived there from the spec's input fields, plus a float64
allowance), so only a CUT between the two thresholds can be decided
differently. ``spec.threshold_error_bound`` must state the same bound. The
noise statistic ``S`` is recomputed here from the float estimate,
``S = estimate * D`` (``docs/bit-true.md`` sections 3 and 4). Specs are
invented scenarios (a made-up ridge-top radar's range line).
"""

from __future__ import annotations

import numpy as np
import pytest

from refmodel.block_spec import spec_from_dict
from refmodel.floatmodel.float_cfar import cfar_1d
from refmodel.fixedpoint.pipeline_fast import run_fast
from vectors.stimulus import Scenario, scenario_blocks
from vectors.vector_set import vector_settings
from test_block_spec import divisor, float_allowance, threshold_error_bound

SPECS = {
    "ca_zero_pad": {"detector": {"kind": "ca", "ref_cells_per_side": 8, "guard_cells_per_side": 2, "alpha": 5.3,
                                 "edge": "zero-pad"},
                    "fixed": {"input_bits": 12, "alpha_frac_bits": 8, "threshold_frac_bits": 1}},
    "go_skip_coarse": {"detector": {"kind": "go", "ref_cells_per_side": 6, "guard_cells_per_side": 1, "alpha": 3.7},
                       "fixed": {"input_bits": 12, "alpha_frac_bits": 3, "rounding": "floor"}},
    "so_circular_csd": {"detector": {"kind": "so", "ref_cells_per_side": 4, "alpha": 6.1, "edge": "circular"},
                        "fixed": {"input_bits": 10, "alpha_frac_bits": 10, "alpha_csd_digits": 2,
                                  "truncate_partials": True, "rounding": "floor", "threshold_frac_bits": 2}},
    "os_one_sided": {"detector": {"kind": "os", "ref_cells_per_side": 8, "rank": 12, "alpha": 2.9,
                                  "edge": "one-sided", "compare": ">="},
                     "fixed": {"input_bits": 12, "alpha_frac_bits": 6, "rounding": "half-even"}},
}


@pytest.mark.parametrize("name", list(SPECS))
def test_disagreements_lie_within_the_threshold_error_bound(name, record_property):
    spec = spec_from_dict({**SPECS[name], "stream": {"frame_length": 128}})
    s = vector_settings(spec)
    sc = Scenario(spec.frame_length, spec.input_bits, s.noise_level_lsb, s.targets, s.clutter_start_cell,
                  s.clutter_to_noise_db, s.spikes_per_frame)
    x = np.concatenate([b.samples for b in scenario_blocks(sc, 200, np.random.SeedSequence(4))])
    frames = x.reshape(-1, spec.frame_length)
    last = np.zeros(frames.shape, dtype=bool)
    last[:, -1] = True
    fixed = run_fast(spec, x, last.ravel())
    det_fixed = fixed.det.reshape(frames.shape)
    flt = cfar_1d(frames, spec.kind, spec.ref_per_side, spec.guard_per_side, spec.alpha, rank=spec.rank,
                  compare=spec.compare, edge=spec.edge)
    decided = ~np.isnan(flt.estimate)
    D = divisor(spec.kind, spec.ref_per_side)  # docs/bit-true.md section 4: 2R, R, R, 1

    def bound(S):
        return threshold_error_bound(spec, S) + float_allowance(spec, S)

    S = np.rint(flt.estimate[decided] * D)  # exact integer sums
    # Nothing saturates (the automatic threshold width holds the largest threshold), so the bound applies.
    t_fixed = fixed.threshold.reshape(frames.shape)[decided] / 2.0 ** spec.threshold_frac_bits
    assert np.all(np.abs(t_fixed - flt.threshold[decided]) <= bound(S))
    # The library's stated bound: the same plus its documented 1e-9 (1 + S) double-precision allowance.
    stated = spec.threshold_error_bound(S)
    assert np.all(np.abs(stated - (threshold_error_bound(spec, S) + 1e-9 * (1 + S))) <= float_allowance(spec, S))
    differ = det_fixed != flt.detections
    assert not (differ & ~decided).any()
    gap = np.abs(frames[differ] - flt.threshold[differ])
    assert np.all(gap <= bound(np.rint(flt.estimate[differ] * D)))
    assert flt.detections.sum() > frames.shape[0]  # the scenario's targets are detected: the test has decisions
    record_property("disagreements", int(differ.sum()))
    print(f"{name}: {int(differ.sum())} of {int(decided.sum())} decisions differ between float and fixed")

"""Float model against fixed-point words on the scenario frames of a vector set.

The same integer samples go through the float golden model
(:func:`refmodel.float_cfar.cfar_1d`, with the spec's own alpha) and the
bit-accurate model (:mod:`refmodel.pipeline_fast`). Where their decisions
differ, the CUT must lie within ``spec.threshold_error_bound(S)`` of the float
threshold: the fixed threshold differs from the float one by at most that
bound (``refmodel/block_spec.py``, ``threshold_error_bound``: constant
quantisation plus product rounding), so only a CUT between the two thresholds
can be decided differently. The noise statistic ``S`` is recomputed here from
the float estimate, ``S = estimate * divisor`` (``docs/bit-true.md`` sections
3 and 4). Specs are invented scenarios (a made-up ridge-top radar's range line).
"""

from __future__ import annotations

import numpy as np
import pytest

from refmodel.block_spec import spec_from_dict
from refmodel.float_cfar import cfar_1d
from refmodel.pipeline_fast import run_fast
from vectors.stimulus import Scenario, scenario_blocks
from vectors.vector_set import vector_settings

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
    S = flt.estimate[decided] * spec.mean_divisor
    # Nothing saturates (the automatic threshold width holds the largest threshold), so the bound applies.
    t_fixed = fixed.threshold.reshape(frames.shape)[decided] / 2.0 ** spec.threshold_frac_bits
    assert np.all(np.abs(t_fixed - flt.threshold[decided]) <= spec.threshold_error_bound(S))
    differ = det_fixed != flt.detections
    assert not (differ & ~decided).any()
    gap = np.abs(frames[differ] - flt.threshold[differ])
    assert np.all(gap <= spec.threshold_error_bound(flt.estimate[differ] * spec.mean_divisor))
    assert flt.detections.sum() > frames.shape[0]  # the scenario's targets are detected: the test has decisions
    record_property("disagreements", int(differ.sum()))
    print(f"{name}: {int(differ.sum())} of {int(decided.sum())} decisions differ between float and fixed")

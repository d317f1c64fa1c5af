"""Benchmarks of the quantisation study; prints JSON lines {"metric", "value", "unit", "target", "better"}.

- ``exact_pfa_time_over_mc_time_1e-8``: time of the exact Pfa
  (``trigger_law(...).pfa()``) of a CA block designed for Pfa 1e-8 (16-bit
  input, R = 16, noise at 256 LSB, so the FFT path with tilting runs) over
  the time a Monte Carlo of the same relative precision would need: 10%
  relative standard error needs about 100 / Pfa = 1e10 windows, at the
  window rate measured in the same run (target 0.001, lower is better).
- ``mc_cell_rate_over_exponential_rate``: cells per second through the
  Monte Carlo kernel (draw, quantise, statistic, threshold, compare; a window
  is 2R + 1 cells) over numpy's standard exponential draws per second into a
  buffer of the same size, measured alternately in the same run; the best of
  several repetitions of each (target 1/3, higher is better).
- ``exact_pfa_seconds_1e-8``, ``mc_window_rate``: the raw figures (no target).

The block is an invented scenario: a made-up coastal radar's range line.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from measure import emit  # noqa: E402
from refmodel.block_spec import spec_from_dict  # noqa: E402
from refmodel.fixedpoint.exact_pfa import trigger_law  # noqa: E402
from refmodel.study.window_trials import CHUNK_TRIALS, run_trials  # noqa: E402

SPEC = {
    "detector": {"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "design_pfa": 1e-8},
    "fixed": {"input_bits": 16, "alpha_frac_bits": 14, "threshold_frac_bits": 2},
}
NOISE_LSB = 256.0
MC_TRIALS = 400_000
REPEATS = 5


def main() -> None:
    spec = spec_from_dict(SPEC)
    rng = np.random.default_rng(1)
    cells = spec.n_ref + 1
    buf = np.empty(MC_TRIALS * cells)
    exact_t, mc_t, exp_t = [], [], []
    pfa = None
    for _ in range(REPEATS):
        t = time.perf_counter()
        pfa = trigger_law(spec, NOISE_LSB).pfa()
        exact_t.append(time.perf_counter() - t)
        t = time.perf_counter()
        run_trials(spec, NOISE_LSB, MC_TRIALS, rng)
        mc_t.append(time.perf_counter() - t)
        t = time.perf_counter()
        for i in range(0, buf.size, CHUNK_TRIALS * cells):
            rng.standard_exponential(out=buf[i : i + CHUNK_TRIALS * cells])
        exp_t.append(time.perf_counter() - t)
    t_exact = min(exact_t)
    window_rate = MC_TRIALS / min(mc_t)
    needed = 100.0 / pfa
    emit("exact_pfa_time_over_mc_time_1e-8", t_exact / (needed / window_rate), "ratio", 0.001, "lower")
    emit("mc_cell_rate_over_exponential_rate", (MC_TRIALS * cells / min(mc_t)) / (buf.size / min(exp_t)), "ratio",
         round(1 / 3, 3), "higher")
    emit("exact_pfa_seconds_1e-8", t_exact, "s", None, "lower")
    emit("mc_window_rate", window_rate, "windows/s", None, "higher")


if __name__ == "__main__":
    main()

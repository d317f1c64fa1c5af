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
- ``area_seconds_per_parameter_set``: wall time of the Yosys area of the
  reference core (``hdl_tb.area_cost.AreaCoster``, flow ice40, 2 workers,
  an empty cache) over the number of distinct core parameter sets of a
  small study grid (target 1.5 s on 2 cores, lower is better).
- ``study_cached_rerun_over_first_run``: the same study (area included, no
  Monte Carlo) run twice on one cache, second wall time over the first
  (target 0.2, lower is better); ``area_cached_rerun_over_first_run`` the
  same for the area step alone (no target).
- ``area_cpu_seconds_per_parameter_set``: CPU time of the Yosys processes per
  set (less sensitive to a loaded machine than the wall time; on 2 idle
  cores the wall time per set is about half of it).

Skip the area figures with ``--no-area`` (or when Yosys is missing).

The block is an invented scenario: a made-up coastal radar's range line.
"""

from __future__ import annotations

import resource
import shutil
import sys
import tempfile
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


#: The study grid of the area figures: 5 input widths x 2 constants = 10 distinct core parameter sets.
AREA_SPEC = {
    "detector": {"kind": "ca", "ref_cells_per_side": 8, "guard_cells_per_side": 2, "design_pfa": 1e-4},
    "fixed": {"input_bits": 12, "alpha_frac_bits": 10},
}
AREA_OPTIONS = {"input_bits": "8:16:2", "noise_level_lsb": "64", "mc_trials": 0, "snr_db": "13"}
AREA_WORKERS = 2


def bench_area() -> None:
    from hdl_tb.area_cost import AreaCoster
    from hdl_tb.core_params import core_parameters
    from refmodel.study.quant_study import run_study, study_config

    spec = spec_from_dict(AREA_SPEC)
    cfg = study_config(spec, AREA_OPTIONS)
    with tempfile.TemporaryDirectory(prefix="bench-area-") as tmp:
        coster = AreaCoster(flow="ice40", cache_dir=Path(tmp) / "study", workers=AREA_WORKERS)
        t = time.perf_counter()
        first = run_study(spec, cfg, workers=AREA_WORKERS, progress=False, area=coster)
        t_first = time.perf_counter() - t
        t = time.perf_counter()
        run_study(spec, cfg, workers=AREA_WORKERS, progress=False, area=coster)
        t_second = time.perf_counter() - t
        specs = [spec_from_dict(d) for d in first.specs_data]
        n_sets = len({tuple(sorted(core_parameters(s).items())) for s in specs})
        area_only = AreaCoster(flow="ice40", cache_dir=Path(tmp) / "area", workers=AREA_WORKERS)
        ru = resource.getrusage(resource.RUSAGE_CHILDREN)
        t = time.perf_counter()
        area_only.cost_many(specs)
        t_area = time.perf_counter() - t
        ru2 = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu = (ru2.ru_utime - ru.ru_utime) + (ru2.ru_stime - ru.ru_stime)
        t = time.perf_counter()
        area_only.cost_many(specs)
        t_area2 = time.perf_counter() - t
    emit("area_seconds_per_parameter_set", t_area / n_sets, "s", 1.5, "lower", 3)
    emit("area_cpu_seconds_per_parameter_set", cpu / n_sets, "s", None, "lower", 3)
    emit("study_cached_rerun_over_first_run", t_second / t_first, "ratio", 0.2, "lower", 3)
    emit("area_cached_rerun_over_first_run", t_area2 / t_area, "ratio", None, "lower", 4)
    emit("area_distinct_parameter_sets", n_sets, "sets", None, "higher")


def main() -> None:
    if "--no-area" not in sys.argv and shutil.which("yosys") is not None:
        bench_area()
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

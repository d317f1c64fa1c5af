"""Benchmarks of the range-Doppler (map) models; prints JSON lines {"metric", "value", "unit", "target", "better"}.

- ``map_fast_over_cumsum``: time of the fast map model (refmodel.fixedpoint.map_fast) on one
  1024 x 256 map with a 9 x 9 window, CA, over the time of one ``numpy.cumsum`` along each axis of
  the same map, measured in the same run (target 8).
- ``map_set_peak_memory``: peak resident memory (``ru_maxrss``) of a child process that writes a
  vector set of 4 maps of 4096 x 1024 cells (target 300 MB). ``CFARVEC_BENCH_MAP_SCALE`` divides
  the map's range size for a quick run.

The block specs are invented scenarios: a made-up marina radar's range-Doppler maps.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from measure import best_of, emit  # noqa: E402
from refmodel.block_spec import spec_from_dict  # noqa: E402
from refmodel.fixedpoint.map_fast import map_words  # noqa: E402

SCALE = int(os.environ.get("CFARVEC_BENCH_MAP_SCALE", 1))

CHILD = r"""
import resource, sys, time
from refmodel.block_spec import spec_from_dict
from vectors.vector_set import write_vector_set
spec = spec_from_dict({
    "detector": {"kind": "ca", "alpha": 6.0},
    "fixed": {"input_bits": 16},
    "map": {"range_cells": int(sys.argv[2]), "doppler_bins": 1024, "order": "doppler-fast", "ref_range": 3,
            "ref_doppler": 3, "guard_range": 1, "guard_doppler": 1},
    "vectors": {"scenario_maps": 4, "random_maps": 0, "include_corner_cases": False},
})
t = time.perf_counter()
m = write_vector_set(spec, sys.argv[1])
print(m["totals"]["samples"], time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def fast_ratio() -> float:
    spec = spec_from_dict({
        "detector": {"kind": "ca", "alpha": 6.0},
        "fixed": {"input_bits": 16},
        "map": {"range_cells": 1024, "doppler_bins": 256, "order": "doppler-fast", "ref_range": 3, "ref_doppler": 3,
                "guard_range": 1, "guard_doppler": 1},
    })
    assert (spec.window.wd, spec.window.wr) == (9, 9)
    rng = np.random.default_rng(1)
    cells = rng.integers(0, 1 << 16, spec.map_cells).astype(np.int64)
    m = cells.reshape(1024, 256)
    model = best_of(lambda: map_words(spec, cells))
    cumsum = best_of(lambda: (np.cumsum(m, axis=0), np.cumsum(m, axis=1)))
    return model / cumsum


def set_memory(tmp: Path) -> tuple[float, float, int]:
    out = subprocess.run([sys.executable, "-c", CHILD, str(tmp / "set"), str(4096 // SCALE)], cwd=ROOT,
                         capture_output=True, text=True, check=True)
    samples, seconds, maxrss_kib = out.stdout.split()
    return int(maxrss_kib) / 1024.0, float(seconds), int(samples)


def main():
    emit("map_fast_over_cumsum", round(fast_ratio(), 2), "x two numpy.cumsum (1024 x 256, 9 x 9, CA)", 8, "lower")
    with tempfile.TemporaryDirectory() as d:
        mb, seconds, samples = set_memory(Path(d))
        emit("map_set_peak_memory", round(mb, 1), f"MB ({samples} cells, 4 maps)", 300, "lower")
        emit("map_set_generation_rate", round(samples / seconds / 1e6, 2), "M cells/s", None, "higher")


if __name__ == "__main__":
    main()

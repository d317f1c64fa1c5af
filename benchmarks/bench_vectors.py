"""Benchmarks of vector-set generation; prints JSON lines {"metric", "value", "unit", "target", "better"}.

- ``hex_write_speedup``: time of ``numpy.savetxt(fmt="%x")`` over the time of
  cfarvec's ``$readmemh`` writer on the same words, in the same run (target 10).
- ``set_peak_memory``: peak resident memory (``ru_maxrss``) of a child process
  that writes a 100-million-sample set (target 300 MB). ``CFARVEC_BENCH_SAMPLES``
  changes the size for a quick run.

The block spec is an invented scenario: a made-up ridge-top radar's range line.
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
from vectors.writers import VectorFileWriter  # noqa: E402

WORDS = 2_000_000
BITS = 29
SET_SAMPLES = int(os.environ.get("CFARVEC_BENCH_SAMPLES", 100_000_000))
FRAME = 1024

CHILD = r"""
import resource, sys, time
from refmodel.block_spec import spec_from_dict
from vectors.vector_set import write_vector_set
frames = int(sys.argv[2])
spec = spec_from_dict({
    "detector": {"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "alpha": 6.0},
    "fixed": {"input_bits": 16},
    "stream": {"frame_length": %d},
    "vectors": {"scenario_frames": frames, "random_frames": 0, "include_corner_cases": False},
})
t = time.perf_counter()
m = write_vector_set(spec, sys.argv[1])
print(m["totals"]["samples"], time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
""" % FRAME


def hex_speedup(tmp: Path) -> float:
    words = np.random.default_rng(1).integers(0, 1 << BITS, WORDS, dtype=np.uint64)

    def ours():
        w = VectorFileWriter(tmp / "ours.hex", "expected", "hex", BITS)
        for part in np.array_split(words, 4):
            w.write(part)
        w.close()

    def reference():
        with open(tmp / "ref.hex", "wb") as f:
            np.savetxt(f, words, fmt="%x")

    return best_of(reference, 2) / best_of(ours)


def set_memory(tmp: Path) -> tuple[float, float, int]:
    frames = max(1, SET_SAMPLES // FRAME)
    out = subprocess.run([sys.executable, "-c", CHILD, str(tmp / "set"), str(frames)], cwd=ROOT,
                         capture_output=True, text=True, check=True)
    samples, seconds, maxrss_kib = out.stdout.split()
    return int(maxrss_kib) / 1024.0, float(seconds), int(samples)


def main():
    with tempfile.TemporaryDirectory() as d:
        tmp = Path(d)
        emit("hex_write_speedup", round(hex_speedup(tmp), 1), "x numpy.savetxt", 10, "higher")
        mb, seconds, samples = set_memory(tmp)
        emit("set_peak_memory", round(mb, 1), f"MB ({samples} samples)", 300, "lower")
        emit("set_generation_rate", round(samples / seconds / 1e6, 2), "M samples/s", None, "higher")


if __name__ == "__main__":
    main()

"""Benchmarks of the bit-accurate pipeline models; prints JSON lines {"metric", "value", "unit", "target", "better"}.

- ``fast_model_time_over_cumsum``: time of ``run_fast`` on a 10-million-sample
  CA stream (16-bit input, R = 16, G = 2, frames of 4096) over the time of one
  ``numpy.cumsum`` of the same int64 array, measured alternately in the same
  run; the best (CPU time, see below) of several repetitions of each (target 5).
- ``fast_model_rate``: samples per CPU second of that run (no target).
- ``os_fast_model_time_over_cumsum_1e6`` and ``..._1e7``: the same ratio for
  an OS block (16-bit input, R = 16, G = 2, rank 24 of 32, frames of 4096)
  on 10^6 and 10^7 samples (target 10).
- ``structural_model_rate``: samples per second of the cycle-stepped
  structural model on 20,000 samples (no target).
- ``chunked_peak_memory_100M``: peak resident memory (``VmHWM``) of a child
  process that pushes a 100-million-sample stream through ``FastPipeline`` in
  chunks of one million, generating the stimulus chunk by chunk (target 300 MB).
  ``CFARVEC_BENCH_SAMPLES`` changes the stream length for a quick run.

The three ratios are of the CPU time of this thread (``time.thread_time``;
numpy runs both on this one thread). On a machine with more runnable
processes than cores, wall time inflates the longer operation: a 2 ms
cumsum mostly finishes within one time slice, a 15 ms model run is
preempted (at 10^6 samples the wall-time ratio was seen to double under load
while the CPU-time ratio stayed put). On an idle machine the two agree. The
wall-time ratios of the same repetitions go to stderr.

The block spec is an invented scenario: a made-up coastal radar's range line.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from measure import emit  # noqa: E402
from refmodel.block_spec import spec_from_dict  # noqa: E402
from refmodel.fixedpoint.pipeline_fast import FastPipeline, run_fast  # noqa: E402

SPEC = {
    "detector": {"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "alpha": 5.0},
    "fixed": {"input_bits": 16},
    "stream": {"frame_length": 4096},
}
OS_SPEC = {
    "detector": {"kind": "os", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "rank": 24, "alpha": 5.0},
    "fixed": {"input_bits": 16},
    "stream": {"frame_length": 4096},
}
RATIO_SAMPLES = 10_000_000
STRUCT_SAMPLES = 20_000
MEMORY_SAMPLES = int(os.environ.get("CFARVEC_BENCH_SAMPLES", 100_000_000))
CHUNK = 1_000_000
REPEATS = 9


def stimulus(rng, n, frame, offset=0):
    """Exponential noise (square-law) clipped to 16 bits, with last markers every `frame` samples of the stream."""
    x = np.minimum(rng.exponential(3000.0, n), 65535).astype(np.int64)
    last = (np.arange(offset, offset + n) % frame) == frame - 1
    return x, last


def _best_times(spec_data, n, name):
    """Best CPU times of REPEATS runs of run_fast and of one numpy.cumsum of the same int64 samples, alternated."""
    spec = spec_from_dict(spec_data)
    x, last = stimulus(np.random.default_rng(1), n, 4096)
    last[-1] = True  # the final, shorter frame
    cpu = {"fast": [], "base": []}
    wall = {"fast": [], "base": []}
    for _ in range(REPEATS):  # alternate, so that both see the same machine load
        for key, run in (("base", lambda: np.cumsum(x)), ("fast", lambda: run_fast(spec, x, last))):
            w, c = time.perf_counter(), time.thread_time()
            run()
            cpu[key].append(time.thread_time() - c)
            wall[key].append(time.perf_counter() - w)
    print(f"{name}: wall-time ratio of the best runs {min(wall['fast']) / min(wall['base']):.2f}", file=sys.stderr)
    return min(cpu["fast"]), min(cpu["base"])


def ratio_to_cumsum():
    fast, base = _best_times(SPEC, RATIO_SAMPLES, "fast_model_time_over_cumsum")
    emit("fast_model_time_over_cumsum", round(fast / base, 2), "ratio", 5, "lower")
    emit("fast_model_rate", round(RATIO_SAMPLES / fast), "samples/s", None, "higher")


def os_ratio_to_cumsum():
    for n, name in ((1_000_000, "1e6"), (10_000_000, "1e7")):
        metric = f"os_fast_model_time_over_cumsum_{name}"
        fast, base = _best_times(OS_SPEC, n, metric)
        emit(metric, round(fast / base, 2), "ratio", 10, "lower")


def structural_rate():
    try:
        from refmodel.fixedpoint.pipeline_struct import run_structural
    except ImportError:
        print("structural_model_rate: refmodel.fixedpoint.pipeline_struct.run_structural is not in this tree; skipped",
              file=sys.stderr)
        return
    spec = spec_from_dict(SPEC)
    x, last = stimulus(np.random.default_rng(2), STRUCT_SAMPLES, 4096)
    last[-1] = True
    t = time.perf_counter()
    run_structural(spec, x, last)
    emit("structural_model_rate", round(STRUCT_SAMPLES / (time.perf_counter() - t)), "samples/s", None, "higher")


def peak_rss_kib():
    """Peak resident memory of this process in KiB.

    Linux's ``VmHWM`` belongs to the process's own address space; ``ru_maxrss``
    is carried over ``exec`` from the forking parent, so a child started by a
    parent holding big arrays would report the parent's peak.
    """
    try:
        with open("/proc/self/status") as f:
            return int(next(line.split()[1] for line in f if line.startswith("VmHWM:")))
    except (OSError, StopIteration):
        import resource

        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss


def memory_child(n):
    """Run in a child process: stream n samples through FastPipeline chunk by chunk; print peak RSS in KiB."""
    spec = spec_from_dict(SPEC)
    rng = np.random.default_rng(3)
    pipe = FastPipeline(spec)
    words = 0
    for start in range(0, n, CHUNK):
        x, last = stimulus(rng, min(CHUNK, n - start), 4096, start)
        if start + x.size == n:
            last[-1] = True
        words += len(pipe.push(x, last))
    words += len(pipe.finish())
    assert words == n
    print(peak_rss_kib())


def peak_memory():
    out = subprocess.run([sys.executable, __file__, "--memory-child", str(MEMORY_SAMPLES)], check=True,
                         capture_output=True, text=True)
    mib = int(out.stdout.split()[-1]) / 1024
    emit("chunked_peak_memory_100M", round(mib, 1), "MiB", 300, "lower")


if __name__ == "__main__":
    if len(sys.argv) == 3 and sys.argv[1] == "--memory-child":
        memory_child(int(sys.argv[2]))
    else:
        peak_memory()  # first, while this process is still small
        ratio_to_cumsum()
        os_ratio_to_cumsum()
        structural_rate()

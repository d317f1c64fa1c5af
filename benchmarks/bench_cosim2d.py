"""Co-simulation speed of the map (range-Doppler) core: pure-Verilog bench and bulk cocotb bench on Icarus.

Two vector sets (INVENTED SCENARIO, benchmark data, not a real system), both
16-bit input words, about 400,000 words each (twice ``bench_cosim.py``'s: the
map core runs at about 24,000 cells/s, so the bulk bench's second of cocotb
start-up would otherwise weigh a tenth of a run), are generated once:

- 1D: the CA detector of ``bench_cosim.py`` (16 reference and 2 guard cells
  a side, 512-cell frames and random frames) on the 1D core ``cfar_stream``;
- 2D: a CA detector on 128 x 64 range-Doppler maps streamed Doppler-fast,
  a 7 x 9 window (guard rectangle 3 x 3, reference ring of 54 cells),
  zero-pad along range, circular along Doppler (the two line stores), on
  the map core ``cfar_map``.

In this one process, with the same input gaps (20 %), output backpressure
(30 %) and seed, the pure-Verilog benches of both run alternately, three
times each, and the 2D bulk cocotb bench three times between them; the
faster run of each counts (the machines are shared and noisy). Rates are
words per second of the whole simulator run, start-up included (what a user
waits for, as ``bench_cosim.py``); the bulk bench's rate of its streaming
alone is printed too, and the same ratios by CPU time of the simulator
processes (``*_cpu``: less disturbed by the other jobs of a shared machine
than wall time; the first run of each folder, which builds it, is left out).

Targets (issue 11): ``cosim2d_verilog_over_1d`` >= 0.5 (map cells per
second over 1D samples per second, same input width),
``cosim2d_bulk_over_verilog`` >= 0.9 (bulk cocotb over pure-Verilog on the
same 2D vectors).

Output: JSON lines ``{"metric", "value", "unit", "target", "better"}``.
"""

from __future__ import annotations

import functools
import resource
import shutil
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from measure import emit as _emit  # noqa: E402

emit = functools.partial(_emit, digits=4)
from hdl_tb.cosim import run_folder  # noqa: E402
from hdl_tb.tb_generator import write_testbench  # noqa: E402
from refmodel.block_spec import spec_from_dict  # noqa: E402

WORDS = 400_000
SPEC_1D = {
    "detector": {"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "alpha": 17.28,
                 "edge": "zero-pad"},
    "fixed": {"input_bits": 16, "rounding": "half-up", "overflow": "saturate"},
    "stream": {"frame_length": 512, "pipeline_stages": 2},
    "vectors": {"seed": 2026, "scenario_frames": 8, "random_frames": 16, "random_length_max": 1024},
}
SPEC_2D = {
    "detector": {"kind": "ca", "alpha": 12.0},
    "fixed": {"input_bits": 16, "rounding": "half-up", "overflow": "saturate"},
    "stream": {"pipeline_stages": 2},
    "map": {"range_cells": 128, "doppler_bins": 64, "order": "doppler-fast", "window": "ring", "ref_range": 3,
            "ref_doppler": 2, "guard_range": 1, "guard_doppler": 1, "range_edge": "zero-pad",
            "doppler_edge": "circular"},
    "vectors": {"seed": 2026, "scenario_maps": 4, "random_maps": 4},
}


def _run(folder: Path, mode: str):
    """One run: the result and the CPU seconds of the processes it started (the simulator)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    r = run_folder(folder, mode, samples=WORDS)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if not r.passed:
        raise SystemExit(f"{folder.name} {mode} run failed: {r.problems}")
    return r, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def main() -> int:
    work = Path(tempfile.mkdtemp(prefix="cfarvec-bench-cosim2d-"))
    try:
        one, two = work / "one", work / "two"
        write_testbench(spec_from_dict(SPEC_1D), one, samples=WORDS, gap_percent=20, stall_percent=30)
        write_testbench(spec_from_dict(SPEC_2D), two, samples=WORDS, gap_percent=20, stall_percent=30)
        runs: dict[str, list] = {"1d": [], "2d": [], "bulk": []}
        for _ in range(3):
            runs["1d"].append(_run(one, "verilog"))
            runs["2d"].append(_run(two, "verilog"))
            runs["bulk"].append(_run(two, "bulk"))
        best = {k: max((r for r, _ in v), key=lambda r: r.samples_per_second) for k, v in runs.items()}
        cpu = {k: max(r.words_expected / seconds for r, seconds in v[1:]) for k, v in runs.items()}
        rate_1d, rate_2d, rate_bulk = (best[k].samples_per_second for k in ("1d", "2d", "bulk"))
        emit("cosim1d_verilog_samples_per_s", rate_1d, "samples/s", None, "higher")
        emit("cosim2d_verilog_cells_per_s", rate_2d, "cells/s", None, "higher")
        emit("cosim2d_bulk_cells_per_s", rate_bulk, "cells/s", None, "higher")
        emit("cosim2d_bulk_stream_cells_per_s", best["bulk"].words_expected / best["bulk"].stream_seconds, "cells/s",
             None, "higher")
        emit("cosim2d_verilog_over_1d", rate_2d / rate_1d, "ratio", 0.5, "higher")
        emit("cosim2d_bulk_over_verilog", rate_bulk / rate_2d, "ratio", 0.9, "higher")
        emit("cosim2d_verilog_over_1d_cpu", cpu["2d"] / cpu["1d"], "ratio", 0.5, "higher")
        emit("cosim2d_bulk_over_verilog_cpu", cpu["bulk"] / cpu["2d"], "ratio", 0.9, "higher")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

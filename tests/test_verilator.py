"""Verilator as a second simulator: the parameter checks, the pure-Verilog bench and a cocotb bench.

Sources beside the checks:

- ``docs/reference-core.md`` "The check construct": an illegal parameter set
  must stop Icarus Verilog, Verilator and Yosys with a message naming what
  is wrong, and a legal one must pass all three.
- ``docs/bit-true.md`` section 8: one output word per input sample, in input
  order, so the same stimulus gives the same received words on any correct
  simulator (compared here word for word between Icarus and Verilator).

One small configuration keeps the CI time small: a Verilator build costs
several seconds of C++ compilation.
"""

from __future__ import annotations

import shutil
import subprocess

import pytest

from hdl_tb.core_params import CORE_SOURCES, core_parameters
from hdl_tb.cosim import cosim, run_folder
from hdl_tb.simulators import VERILATOR_FLAGS, verilator_environment, verilator_root
from hdl_tb.synthesis import SynthesisError, synthesize
from hdl_tb.tb_generator import write_testbench
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError


def _have_verilator() -> bool:
    try:
        verilator_root()
    except SpecError:
        return False
    return shutil.which("g++") is not None and shutil.which("make") is not None


pytestmark = [
    pytest.mark.skipif(not _have_verilator(), reason="Verilator (the verilator package), g++ or make is missing"),
    pytest.mark.skipif(shutil.which("iverilog") is None, reason="Icarus Verilog is not installed; run `make tools`"),
]

SPEC = {"detector": {"kind": "so", "ref_cells_per_side": 4, "guard_cells_per_side": 1, "alpha": 4.5,
                     "edge": "one-sided"},
        "fixed": {"input_bits": 8, "rounding": "half-even"}, "stream": {"frame_length": 40, "pipeline_stages": 2},
        "vectors": {"seed": 77, "scenario_frames": 2, "random_frames": 4, "random_length_max": 60}}


def _lint(params: dict, tmp_path) -> subprocess.CompletedProcess:
    flags = [f for f in VERILATOR_FLAGS if f.startswith("-W")]  # the warning flags of every build
    cmd = [str(verilator_root() / "bin" / "verilator"), "--lint-only", *flags, "--top-module", "cfar_stream", *(f"-G{k}={v}" for k, v in params.items()), str(CORE_SOURCES[0])]
    return subprocess.run(cmd, capture_output=True, text=True, env=verilator_environment(), cwd=tmp_path)


def _icarus(params: dict, tmp_path) -> subprocess.CompletedProcess:
    cmd = ["iverilog", "-g2012", "-s", "cfar_stream", "-o", str(tmp_path / "x.vvp"),
           *(f"-Pcfar_stream.{k}={v}" for k, v in params.items()), str(CORE_SOURCES[0])]
    return subprocess.run(cmd, capture_output=True, text=True)


@pytest.mark.parametrize("change, name", [({"REF_CELLS": 0}, "REF_CELLS_must_be_at_least_1"),
                                          ({"ROUNDING": 7}, "ROUNDING_must_be_0_floor_1_half_up_or_2_half_even"),
                                          ({"TRUNCATE_PARTIALS": 1, "ROUNDING": 1},
                                           "TRUNCATE_PARTIALS_needs_ROUNDING_0_floor")])
def test_illegal_parameters_stop_every_tool(tmp_path, change, name):
    good = core_parameters(spec_from_dict(SPEC))
    assert _lint(good, tmp_path).returncode == 0
    assert _icarus(good, tmp_path).returncode == 0
    bad = {**good, **change}
    for proc in (_lint(bad, tmp_path), _icarus(bad, tmp_path)):
        assert proc.returncode != 0
        assert f"cfar_stream_PARAMETER_ERROR__{name}" in proc.stdout + proc.stderr
    if shutil.which("yosys") is not None:
        synthesize(good)
        with pytest.raises(SynthesisError) as err:
            synthesize(bad)
        assert name.replace("_", " ") in str(err.value)


def test_pure_verilog_bench_on_verilator_gives_the_icarus_words(tmp_path):
    folder = tmp_path / "b"
    write_testbench(spec_from_dict(SPEC), folder, gap_percent=25, stall_percent=35)
    icarus = run_folder(folder, "verilog", simulator="icarus")
    verilator = run_folder(folder, "verilog", simulator="verilator")
    assert icarus.passed and verilator.passed, (icarus.problems, verilator.problems)
    assert verilator.simulator == "verilator" and verilator.words_compared == verilator.words_expected > 0
    words = [(r.build_dir / "received.hex").read_text().split() for r in (icarus, verilator)]
    assert words[0] == words[1]


def test_bulk_cocotb_bench_on_verilator(tmp_path):
    r = cosim(spec_from_dict(SPEC), mode="bulk", simulator="verilator", folder=tmp_path / "b", seed=3)
    assert r.passed, r.problems
    assert r.simulator == "verilator" and r.seed == 3
    assert r.words_compared == r.words_expected > 0
    assert r.results_xml is not None and r.results_xml.is_file()

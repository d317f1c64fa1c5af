"""The testbench folder: layout, content, atomic writes, and that its own runners work.

Sources beside each check: ``docs/bit-true.md`` sections 1 and 8 (stimulus
and output word layout), IEEE Std 1364-2005 section 17.2.9 (``$readmemh``
text: one hex word per line), the JUnit XML result format as written by
cocotb's runner (``testsuite``/``testcase``/``failure`` elements),
``hdl_tb/rtl/cfar_stream_tb.v`` (the pure-Verilog bench the folder reuses),
ARM IHI 0051A section 2.2.1 (a sink may wait for TVALID before raising
TREADY: the folder's sink setting).
The block specs are invented scenarios.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

import hdl_tb.tb_generator as tb_generator
from cfarvec.cli import main
from hdl_tb.core_params import BENCH_SOURCE, CORE_SOURCES, core_parameters
from hdl_tb.tb_generator import bench_parameters, read_config, whole_frames, write_testbench
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError

needs_iverilog = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                    reason="Icarus Verilog is not installed")

# INVENTED SCENARIO (test data): a short-range line of "Pebble Cove", a made-up
# coastal radar; 10-bit samples, 40 cells a line, a small vector set.
SMALL = {
    "detector": {"kind": "ca", "ref_cells_per_side": 3, "guard_cells_per_side": 1, "alpha": 4.5,
                 "edge": "zero-pad"},
    "fixed": {"input_bits": 10, "rounding": "half-even"},
    "stream": {"frame_length": 40},
    "vectors": {"seed": 7, "scenario_frames": 2, "random_frames": 4, "random_length_max": 50},
}


def _spec(**changes):
    data = json.loads(json.dumps(SMALL))
    for section, values in changes.items():
        data.setdefault(section, {}).update(values)
        data[section] = {k: v for k, v in data[section].items() if v is not None}
    return spec_from_dict(data)


def _hex_words(path: Path) -> list[int]:
    # IEEE Std 1364-2005, 17.2.9: white-space separated hex numbers.
    return [int(t, 16) for t in path.read_text().split()]


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    out = tmp_path_factory.mktemp("tb") / "bench"
    write_testbench(_spec(), out, check_ports=False)
    return out


def test_layout(folder):
    expected = {"README.md", "Makefile", "bench_config.json", "cfarvec_cocotb_bench.py", "test_cfarvec_cosim.py",
                "vectors/stimulus.hex", "vectors/expected.hex", "vectors/manifest.json",
                "bench/cfarvec_port_adapter.v", "bench/cfarvec_bulk_top.v", "bench/cfar_stream_tb.v",
                "bench/timescale.f", *(f"rtl/{src.name}" for src in CORE_SOURCES),
                # The default gap and stall patterns (hdl_tb/pause_pattern.py), so `make verilog` needs no Python.
                "patterns/gaps-p20-s7.mem", "patterns/stalls-p30-s7.mem"}
    found = {str(p.relative_to(folder)) for p in folder.rglob("*") if p.is_file()}
    assert found == expected


def test_reference_core_and_bench_are_copied_unchanged(folder):
    for src in CORE_SOURCES:
        assert (folder / "rtl" / src.name).read_bytes() == src.read_bytes()
    assert (folder / "bench" / "cfar_stream_tb.v").read_bytes() == BENCH_SOURCE.read_bytes()


def test_no_placeholder_is_left(folder):
    for p in folder.rglob("*"):
        if p.is_file() and p.suffix != ".hex":
            assert "@@" not in p.read_text(), p


def test_config_matches_the_vector_set(folder):
    cfg = read_config(folder)
    manifest = json.loads((folder / "vectors" / "manifest.json").read_text())
    stim = _hex_words(folder / "vectors" / "stimulus.hex")
    assert cfg["total_words"] == cfg["words"] == len(stim) == manifest["totals"]["samples"]
    assert cfg["modes"]["bulk"]["parameters"]["MAX_WORDS"] >= len(stim)
    # The stream ends with a last marker (docs/bit-true.md section 1, bit W_in).
    assert stim[-1] >> 10 & 1 == 1
    assert cfg["port_map"]["module"] == "cfar_stream"
    # Both cocotb benches run the Verilog driver around the module (the interactive one feeds it frame batches).
    assert cfg["modes"]["interactive"]["toplevel"] == cfg["modes"]["bulk"]["toplevel"] == "cfarvec_bulk_top"
    assert cfg["modes"]["interactive"]["parameters"] == {**core_parameters(_spec()), "MAX_WORDS":
                                                         cfg["modes"]["bulk"]["parameters"]["MAX_WORDS"]}
    assert cfg["sink"] == "independent"


def test_config_spec_rebuilds_the_manifests_constant(tmp_path):
    # The manifest's integer A is authoritative (docs/bit-true.md section 4); the benches
    # rebuild the spec from the configuration and must land on the same words layout and A.
    spec = _spec(detector={"design_pfa": 1e-4, "alpha": None})
    out = tmp_path / "b"
    cfg = write_testbench(spec, out, check_ports=False).config
    manifest = json.loads((out / "vectors" / "manifest.json").read_text())
    assert "design_pfa" not in cfg["spec"]["detector"] and cfg["design_pfa"] == 1e-4
    rebuilt = spec_from_dict(cfg["spec"])
    assert rebuilt.alpha_int == manifest["derived"]["alpha_int"]
    assert rebuilt.output_bits == manifest["words"]["expected"]["bits"]


def test_readme_names_the_module_and_how_to_run(folder):
    text = (folder / "README.md").read_text()
    for needle in ("cfar_stream", "make verilog", "make bulk", "make interactive", "results.xml", "s_axis_tdata"):
        assert needle in text


def test_samples_round_up_to_a_whole_frame(tmp_path):
    out = tmp_path / "b"
    cfg = write_testbench(_spec(), out, samples=500, check_ports=False).config
    stim = _hex_words(out / "vectors" / "stimulus.hex")
    lasts = [i for i, w in enumerate(stim) if w >> 10 & 1]
    # The smallest frame end at or after sample 500 (docs/bit-true.md section 1: frames end on a last marker).
    assert cfg["words"] == min(i for i in lasts if i >= 499) + 1


def test_samples_beyond_the_set_make_it_longer(tmp_path):
    out = tmp_path / "b"
    cfg = write_testbench(_spec(), out, samples=5000, check_ports=False).config
    stim = _hex_words(out / "vectors" / "stimulus.hex")
    assert len(stim) >= 5000 and cfg["total_words"] == len(stim)
    assert stim[cfg["words"] - 1] >> 10 & 1 == 1 and cfg["words"] >= 5000


def test_whole_frames_helper():
    import numpy as np

    # Words with the last marker (bit 4) at indices 2, 5, 9.
    words = np.array([0, 0, 16, 0, 0, 16, 0, 0, 0, 16], dtype=np.uint64)
    assert [whole_frames(words, 4, n) for n in (1, 3, 4, 6, 7, 10, 11)] == [3, 3, 6, 6, 10, 10, 10]


def test_bench_parameters_equal_the_core_parameters_where_the_core_applies():
    spec = _spec()
    assert bench_parameters(spec) == core_parameters(spec)
    os_spec = spec_from_dict({"detector": {"kind": "os", "ref_cells_per_side": 4, "rank": 6, "alpha": 5.0,
                                           "edge": "circular"}})
    p = bench_parameters(os_spec)
    assert p["KIND"] == 3 and p["EDGE"] == 3 and p["ALPHA_INT"] == os_spec.alpha_int


def test_port_mapped_bench_changes_only_the_instance(tmp_path):
    spec = _spec(ports={"reset_active": "low"})
    out = tmp_path / "b"
    write_testbench(spec, out, check_ports=False)
    copy = (out / "bench" / "cfar_stream_tb.v").read_text().splitlines()
    original = BENCH_SOURCE.read_text().splitlines()
    assert copy[0].startswith("// Generated by cfarvec") and copy[1].startswith("//")
    body = copy[2:]
    assert len(body) == len(original)
    diff = [(a, b) for a, b in zip(original, body) if a != b]
    assert len(diff) == 1
    assert diff[0][1] == diff[0][0].replace("cfar_stream", "cfarvec_port_adapter")
    adapter = (out / "bench" / "cfarvec_port_adapter.v").read_text()
    assert "wire dut_reset   = ~bench_reset;" in adapter and ".SRST_LEVEL(0)" in adapter


def test_refuses_a_non_empty_folder_and_replaces_it_with_force(tmp_path):
    out = tmp_path / "b"
    out.mkdir()
    (out / "keep.txt").write_text("mine")
    with pytest.raises(SpecError) as err:
        write_testbench(_spec(), out, check_ports=False)
    assert err.value.field == "--output"
    assert (out / "keep.txt").read_text() == "mine"
    write_testbench(_spec(), out, force=True, check_ports=False)
    assert not (out / "keep.txt").exists() and (out / "bench_config.json").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b"]


def test_a_failure_leaves_nothing_behind(tmp_path, monkeypatch):
    out = tmp_path / "b"
    out.mkdir()
    (out / "keep.txt").write_text("mine")

    def broken(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(tb_generator, "write_vector_set", broken)
    with pytest.raises(OSError):
        write_testbench(_spec(), out, force=True, check_ports=False)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b"]
    assert [p.name for p in out.iterdir()] == ["keep.txt"]


@pytest.mark.parametrize("kwargs, field", [
    (dict(gap_percent=96), "--gaps"),
    (dict(stall_percent=-1), "--stalls"),
    (dict(samples=0), "--samples"),
    (dict(rtl=["/no/such/file.v"]), "--rtl"),
    (dict(top="module"), "--top"),
    (dict(sink="eager"), "--sink"),
])
def test_bad_options_write_nothing(tmp_path, kwargs, field):
    out = tmp_path / "b"
    with pytest.raises(SpecError) as err:
        write_testbench(_spec(), out, check_ports=False, **kwargs)
    assert err.value.field == field
    assert list(tmp_path.iterdir()) == []


def test_reference_core_bench_for_os_and_circular(tmp_path):
    # The reference core builds every kind and edge policy; the bench passes the OS rank and the frame store.
    spec = spec_from_dict({"detector": {"kind": "os", "ref_cells_per_side": 4, "rank": 6, "alpha": 5.0,
                                        "edge": "circular"}})
    folder = write_testbench(spec, tmp_path / "b", check_ports=False).path
    params = json.loads((folder / "bench_config.json").read_text())["modes"]["verilog"]["parameters"]
    assert params["KIND"] == 3 and params["OS_RANK"] == 6 and params["EDGE"] == 3
    assert params["MAX_FRAME_LENGTH"] >= spec.frame_length


@pytest.mark.parametrize("name", ["my core.v", "$(shell true).v", "core;rm.sv", "-x.v"])
def test_rtl_file_names_that_could_inject_are_refused(tmp_path, name):
    # The names are written into the generated Makefile and configuration.
    f = tmp_path / name
    f.write_text("module core; endmodule\n")
    with pytest.raises(SpecError) as err:
        write_testbench(_spec(), tmp_path / "out", rtl=[f], check_ports=False)
    assert err.value.field == "--rtl"
    assert not (tmp_path / "out").exists()


def test_rtl_files_with_the_same_name_are_refused(tmp_path):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    for d in ("a", "b"):
        (tmp_path / d / "core.v").write_text("module core; endmodule\n")
    with pytest.raises(SpecError) as err:
        write_testbench(_spec(), tmp_path / "out", rtl=[tmp_path / "a" / "core.v", tmp_path / "b" / "core.v"],
                        check_ports=False)
    assert err.value.field == "--rtl" and "core.v" in str(err.value)


# ---------------------------------------------------------------- the CLI

def test_cli_writes_a_folder(tmp_path, capsys):
    spec = tmp_path / "s.toml"
    spec.write_text(_toml(SMALL))
    assert main(["testbench", str(spec), "-o", str(tmp_path / "out"), "--samples", "300", "--gaps", "10"]) == 0
    out = capsys.readouterr().out
    assert "wrote" in out and "cfar_stream" in out
    cfg = read_config(tmp_path / "out")
    assert cfg["gap_percent"] == 10 and cfg["words"] >= 300


@pytest.mark.parametrize("args, field", [
    (["--gaps", "200"], "--gaps"),
    (["--samples", "-5"], "--samples"),
    (["--rtl", "nothing_here.v"], "--rtl"),
    (["--top", "wire"], "--top"),
])
def test_cli_bad_options_are_one_line(tmp_path, capsys, args, field):
    spec = tmp_path / "s.toml"
    spec.write_text(_toml(SMALL))
    assert main(["testbench", str(spec), "-o", str(tmp_path / "out"), *args]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith(f"cfarvec testbench: error: {field}:")
    assert not (tmp_path / "out").exists()


def test_cli_refuses_a_non_empty_output(tmp_path, capsys):
    spec = tmp_path / "s.toml"
    spec.write_text(_toml(SMALL))
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "x").write_text("x")
    assert main(["testbench", str(spec), "-o", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--output" in err and "--force" in err


def test_cli_bad_spec_is_one_line(tmp_path, capsys):
    spec = tmp_path / "s.toml"
    spec.write_text(_toml({**SMALL, "ports": {"clock": "1clk"}}))
    assert main(["testbench", str(spec), "-o", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "ports.clock" in err
    assert main(["testbench", str(tmp_path / "none.toml"), "-o", str(tmp_path / "out")]) == 2
    assert capsys.readouterr().err.count("\n") == 1


def _toml(data: dict) -> str:
    lines = []
    for section, values in data.items():
        lines.append(f"[{section}]")
        for k, v in values.items():
            lines.append(f"{k} = {json.dumps(v)}")
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------- the folder's own runners

@needs_iverilog
def test_generated_pytest_runner_passes_and_writes_junit(tmp_path):
    out = tmp_path / "b"
    write_testbench(_spec(), out, samples=400, gap_percent=25, stall_percent=35)
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTEST_", "COCOTB_", "CFARVEC_"))}
    env["CFARVEC_SINK"] = "waits-for-valid"  # the runner's override of the folder's sink
    proc = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider"], cwd=out, env=env,
                          capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stdout[-3000:] + proc.stderr[-2000:]
    assert "2 passed" in proc.stdout
    results = sorted(out.glob("sim_build/*/results.xml"))
    assert [p.parent.name.split("-")[0] for p in results] == ["bulk", "interactive"]
    for p in results:
        suite = ET.parse(p).getroot()
        cases = list(suite.iter("testcase"))
        assert len(cases) == 1 and not list(suite.iter("failure"))
        summary = json.loads((p.parent / "cfarvec_summary.json").read_text())
        assert summary["passed"] and summary["words_compared"] == read_config(out)["words"]
        assert summary["sink"] == "waits-for-valid"


@needs_iverilog
@pytest.mark.skipif(shutil.which("make") is None, reason="make is not installed")
def test_generated_makefile_runs_the_benches(tmp_path):
    out = tmp_path / "b"
    write_testbench(_spec(), out, samples=300)
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTEST_", "COCOTB_"))}
    proc = subprocess.run(["make", "-s", "verilog", "bulk"], cwd=out, capture_output=True, text=True, timeout=300,
                          env=env)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    words = read_config(out)["words"]
    assert f"PASS {words}" in proc.stdout and "1 passed" in proc.stdout
    received = _hex_words(out / "sim_build" / "verilog-icarus" / "received.hex")
    assert received == _hex_words(out / "vectors" / "expected.hex")[:words]
    assert "SINK_WAITS_FOR_VALID=0" in proc.stdout
    proc = subprocess.run(["make", "-s", "verilog", "SINK=waits-for-valid"], cwd=out, capture_output=True, text=True,
                          timeout=300, env=env)
    assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
    assert "SINK_WAITS_FOR_VALID=1" in proc.stdout and f"PASS {words}" in proc.stdout


def test_sink_setting_reaches_the_folder(tmp_path):
    out = tmp_path / "b"
    cfg = write_testbench(_spec(), out, sink="waits-for-valid", check_ports=False).config
    assert cfg["sink"] == read_config(out)["sink"] == "waits-for-valid"
    assert "SINK          ?= waits-for-valid" in (out / "Makefile").read_text()
    assert "waits for TVALID before raising TREADY" in (out / "README.md").read_text()

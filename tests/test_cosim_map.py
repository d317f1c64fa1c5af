"""Co-simulation regression of map (range-Doppler) blocks: RTL on Icarus Verilog against the bit-accurate map model.

Every run goes through :func:`hdl_tb.cosim.cosim` (the generated testbench
folder, its cocotb benches or its pure-Verilog bench): a vector set made by
the real vector generator (expected words from
``refmodel.fixedpoint.map_fast``) is streamed through the RTL with seeded
input gaps and output backpressure, and every output word is compared.
Sources beside the checks:

- ``docs/bit-true-2d.md`` section 8: one output word per map cell, in
  stream order, the CUT field carrying the input cell; section 1: a map
  ends on the cell with the last marker.
- ARM IHI 0051A (AXI4-Stream), 2.2.1: a transfer happens when TVALID and
  TREADY are both high; a sink may wait for TVALID before raising TREADY
  (some runs use such a sink). TLAST and TUSER are the sideband signals of
  2.2.1 and 2.8; ``docs/reference-core-2d.md`` gives them their meaning
  here (TLAST ends each fast-axis line, TUSER starts each map), and a
  module whose TLAST is wrong must fail.

The matrix covers CA, GO and SO; the reference ring and the cross-shaped
window; both streaming orders; skip, zero-pad and circular on each axis
(no store, two line stores, the map store); 4- to 24-bit cells; 2 to 5
pipeline stages; gaps and stalls from 0 to 45 %. The block specs are
invented scenarios with small maps (CI time).
"""

from __future__ import annotations

import shutil

import pytest

from cfarvec.cli import main
from hdl_tb.core_params import MAP_CORE_SOURCES
from hdl_tb.cosim import cosim, run_folder
from refmodel.block_spec import spec_from_dict

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

# name: ([detector], [fixed], stages, [map] fields, gaps %, stalls %, sink)
MAP_MATRIX = {
    "ca-ring-doppler-fast-zeropad-circular-14bit": (
        dict(kind="ca", alpha=2.0), dict(input_bits=14, rounding="half-up"), 2,
        dict(order="doppler-fast", window="ring", ref_range=2, ref_doppler=1, guard_range=1, guard_doppler=1,
             range_edge="zero-pad", doppler_edge="circular"), 20, 30, "independent"),
    "go-ring-range-fast-skip-skip-8bit-wrap": (
        dict(kind="go", alpha=3.5), dict(input_bits=8, rounding="floor", overflow="wrap", threshold_bits=8), 3,
        dict(order="range-fast", window="ring", ref_range=2, ref_doppler=1, guard_range=1, guard_doppler=0,
             range_edge="skip", doppler_edge="skip"), 30, 20, "waits-for-valid"),
    "so-cross-range-fast-skip-zeropad-4bit": (
        dict(kind="so", alpha=2.5, compare=">="), dict(input_bits=4, rounding="half-even", alpha_frac_bits=4), 4,
        dict(order="range-fast", window="cross", ref_range=2, ref_doppler=2, guard_range=1, guard_doppler=1,
             range_edge="skip", doppler_edge="zero-pad"), 10, 45, "independent"),
    "ca-cross-both-circular-16bit-map-store": (
        dict(kind="ca", alpha=1.8), dict(input_bits=16, rounding="half-up"), 5,
        dict(order="doppler-fast", window="cross", ref_range=3, ref_doppler=1, guard_range=0, guard_doppler=1,
             range_edge="circular", doppler_edge="circular"), 25, 25, "independent"),
    "ca-ring-range-fast-doppler-circular-24bit-truncated": (
        dict(kind="ca", alpha=2.2), dict(input_bits=24, rounding="floor", truncate_partials=True,
                                         alpha_csd_digits=3, alpha_frac_bits=10), 2,
        dict(order="range-fast", window="ring", ref_range=1, ref_doppler=1, guard_range=1, guard_doppler=1,
             range_edge="zero-pad", doppler_edge="circular"), 15, 15, "waits-for-valid"),
    "go-ring-doppler-fast-range-circular-10bit": (
        dict(kind="go", alpha=2.9), dict(input_bits=10, rounding="half-up"), 2,
        dict(order="doppler-fast", window="ring", ref_range=1, ref_doppler=2, guard_range=1, guard_doppler=1,
             range_edge="circular", doppler_edge="zero-pad"), 0, 0, "independent"),
    "so-ring-no-guard-12bit-skip-circular": (
        dict(kind="so", alpha=3.1), dict(input_bits=12, rounding="half-even", overflow="saturate"), 3,
        dict(order="doppler-fast", window="ring", ref_range=1, ref_doppler=1, guard_range=0, guard_doppler=0,
             range_edge="skip", doppler_edge="circular"), 40, 10, "independent"),
}


def _spec(name: str, ports: dict | None = None):
    det, fixed, stages, mp, _, _, _ = MAP_MATRIX[name]
    data = {"detector": dict(det), "fixed": dict(fixed), "stream": {"pipeline_stages": stages},
            "map": {"range_cells": 14, "doppler_bins": 10, **mp},
            "vectors": {"seed": 777, "scenario_maps": 1, "random_maps": 2}}
    if ports is not None:
        data["ports"] = ports
    return spec_from_dict(data)


def test_map_matrix_is_what_the_docstring_says():
    specs = [_spec(n) for n in MAP_MATRIX]
    assert len(specs) >= 6
    assert {s.kind for s in specs} == {"ca", "go", "so"}
    assert {s.window.shape for s in specs} == {"ring", "cross"}
    assert {s.order for s in specs} == {"range-fast", "doppler-fast"}
    assert {s.range_edge for s in specs} == {s.doppler_edge for s in specs} == {"skip", "zero-pad", "circular"}
    assert {s.store_cells > 0 for s in specs} == {True, False}
    assert {s.store_cells == s.map_cells for s in specs if s.store_cells} == {True, False}
    assert min(s.input_bits for s in specs) <= 4 and max(s.input_bits for s in specs) >= 24
    assert {v[6] for v in MAP_MATRIX.values()} == {"independent", "waits-for-valid"}


@pytest.mark.parametrize("name", sorted(MAP_MATRIX))
def test_map_bulk_matrix(tmp_path, name):
    gaps, stalls, sink = MAP_MATRIX[name][4:]
    r = cosim(_spec(name), mode="bulk", gap_percent=gaps, stall_percent=stalls, sink=sink, folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"
    assert r.words_compared == r.words_expected > 0
    assert r.mismatches == r.missing_words == r.extra_words == 0
    assert r.details["tlast_errors"] == 0


@pytest.mark.parametrize("name", ["ca-ring-doppler-fast-zeropad-circular-14bit",
                                  "go-ring-doppler-fast-range-circular-10bit",
                                  "so-cross-range-fast-skip-zeropad-4bit"])
def test_map_verilog_and_interactive(tmp_path, name):
    folder = tmp_path / "b"
    gaps, stalls, sink = MAP_MATRIX[name][4:]
    r = cosim(_spec(name), mode="verilog", gap_percent=gaps, stall_percent=stalls, sink=sink, folder=folder)
    assert r.passed, f"{r.problems}"
    assert r.words_compared == r.words_expected > 0
    inter = run_folder(folder, "interactive")
    assert inter.passed, f"{inter.problems}"
    assert inter.words_compared == r.words_expected


# A map module of "your own": other port names, an active-low reset, no TUSER output (the adapter then
# makes it from the count of transfers), its parameters by name from the spec, and fault switches.
USER_MAP_RTL = """\
`timescale 1ns/1ps
module my_map #(
    parameter integer W = 14, parameter integer TB = 16, parameter [63:0] A = 64'd1,
    parameter integer D = 0, parameter integer SB = 20,
    // 1: flip the threshold LSB of every word of the map's last line.
    parameter integer BAD_WORD = 0,
    // 1: TLAST one cell early.
    parameter integer BAD_LAST = 0
) (
    input  wire ck, input wire rst_n,
    input  wire [W-1:0] din, input wire din_vld, output wire din_rdy, input wire din_eol, input wire din_sof,
    output wire [W+TB+2:0] dout, output wire dout_vld, input wire dout_rdy, output wire dout_eol
);
    wire [W+TB+2:0] w;
    wire eol, sof;
    reg [7:0] j;
    cfar_map #(.INPUT_BITS(W), .RANGE_CELLS(14), .DOPPLER_BINS(10), .ORDER(0), .WINDOW(0), .REF_RANGE(2),
               .REF_DOPPLER(1), .GUARD_RANGE(1), .GUARD_DOPPLER(1), .KIND(0), .RANGE_EDGE(1), .DOPPLER_EDGE(3),
               .SUM_BITS(SB), .ALPHA_INT(A), .DROP_BITS(D), .THRESHOLD_BITS(TB), .ROUNDING(1),
               .PIPELINE_STAGES(2), .SRST_LEVEL(0))
        u (.clk(ck), .srst(rst_n), .s_axis_tdata(din), .s_axis_tvalid(din_vld), .s_axis_tready(din_rdy),
           .s_axis_tlast(din_eol), .s_axis_tuser(din_sof), .m_axis_tdata(w), .m_axis_tvalid(dout_vld),
           .m_axis_tready(dout_rdy), .m_axis_tlast(eol), .m_axis_tuser(sof));
    // Position in the output line (10 Doppler bins a line), for the TLAST fault.
    always @(posedge ck) if (!rst_n) j <= 0; else if (dout_vld && dout_rdy) j <= eol ? 0 : j + 1;
    reg [15:0] line;
    always @(posedge ck) if (!rst_n) line <= 0; else if (dout_vld && dout_rdy && eol) line <= w[W+TB+2] ? 0 : line + 1;
    assign dout = (BAD_WORD != 0 && line == 13) ? (w ^ (1 << W)) : w;
    assign dout_eol = (BAD_LAST != 0) ? (j == 8) : eol;
endmodule
"""

USER_PORTS = {"module": "my_map", "clock": "ck", "reset": "rst_n", "reset_active": "low", "in_data": "din",
              "in_valid": "din_vld", "in_ready": "din_rdy", "in_last": "din_eol", "in_user": "din_sof",
              "out_data": "dout", "out_valid": "dout_vld", "out_ready": "dout_rdy", "out_last": "dout_eol",
              "out_user": "", "core_parameters": False,
              "parameters": {"W": "input_bits", "TB": "threshold_bits", "A": "alpha_int", "D": "drop_bits",
                             "SB": "sum_bits"}}


def _user(tmp_path, **faults):
    rtl = tmp_path / "my_map.v"
    rtl.write_text(USER_MAP_RTL, encoding="ascii")
    ports = {**USER_PORTS, "parameters": {**USER_PORTS["parameters"], **faults}}
    return _spec("ca-ring-doppler-fast-zeropad-circular-14bit", ports), [rtl, *MAP_CORE_SOURCES]


@pytest.mark.parametrize("mode", ["bulk", "verilog"])
def test_user_map_core_through_ports(tmp_path, mode):
    spec, rtl = _user(tmp_path)
    r = cosim(spec, mode=mode, rtl=rtl, gap_percent=20, stall_percent=30, folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"
    stimulus = (tmp_path / "b" / "vectors" / "stimulus.hex").read_text().split()
    assert r.words_compared == r.words_expected == len(stimulus)


@pytest.mark.parametrize("mode", ["bulk", "verilog"])
def test_user_map_core_with_wrong_words_fails(tmp_path, mode):
    # docs/bit-true-2d.md section 8: words in stream order, so the corrupted words are those of line 13
    # (the last range cell, doppler-fast: 10 cells) of every map.
    spec, rtl = _user(tmp_path, BAD_WORD=1)
    r = cosim(spec, mode=mode, rtl=rtl, gap_percent=20, stall_percent=30, folder=tmp_path / "b")
    assert not r.passed
    maps = r.words_expected // 140
    assert r.mismatches == 10 * maps


@pytest.mark.parametrize("mode", ["bulk", "verilog"])
def test_user_map_core_with_wrong_tlast_fails(tmp_path, mode):
    spec, rtl = _user(tmp_path, BAD_LAST=1)
    r = cosim(spec, mode=mode, rtl=rtl, gap_percent=10, stall_percent=20, folder=tmp_path / "b")
    assert not r.passed
    if mode == "bulk":
        # Two wrong TLASTs a line (one early, one missing), 14 lines a map.
        assert r.details["tlast_errors"] == 2 * 14 * (r.words_expected // 140)


def test_cli_cosim_on_the_map_example(tmp_path, capsys):
    # The invented example of the repository, one map's worth of cells (CI time).
    from pathlib import Path

    example = Path(__file__).resolve().parents[1] / "examples" / "lagoon_map_ca.toml"
    code = main(["cosim", str(example), "--mode", "verilog", "--samples", "16384", "--json"])
    out = capsys.readouterr().out
    assert code == 0, out
    assert '"mismatches": 0' in out


def _have_verilator() -> bool:
    from hdl_tb.simulators import find_simulator
    from refmodel.errors import SpecError

    try:
        find_simulator("verilator")
    except SpecError:
        return False
    return shutil.which("g++") is not None and shutil.which("make") is not None


@pytest.mark.skipif(not _have_verilator(), reason="Verilator (the verilator package), g++ or make is missing")
def test_map_core_on_verilator(tmp_path):
    # The map core, its elaboration checks ($fatal under Verilator) and cfar_map_tb build and pass there too.
    name = "go-ring-range-fast-skip-skip-8bit-wrap"
    gaps, stalls, sink = MAP_MATRIX[name][4:]
    r = cosim(_spec(name), mode="verilog", simulator="verilator", gap_percent=gaps, stall_percent=stalls, sink=sink,
              folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"
    assert r.words_compared == r.words_expected > 0


@pytest.mark.skipif(not _have_verilator(), reason="Verilator (the verilator package), g++ or make is missing")
def test_map_core_parameter_check_stops_verilator(tmp_path):
    # docs/reference-core.md, "The check construct": an elaboration-time $fatal under Verilator.
    from hdl_tb.core_params import MAP_BENCH_SOURCE, core_parameters
    from hdl_tb.simulators import build_verilog_bench
    from refmodel.errors import SpecError

    for src in (*MAP_CORE_SOURCES, MAP_BENCH_SOURCE):
        shutil.copy(src, tmp_path / src.name)
    params = {**core_parameters(_spec("ca-ring-doppler-fast-zeropad-circular-14bit")), "KIND": 3, "MAX_WORDS": 16}
    with pytest.raises(SpecError, match="KIND_3_os_is_not_supported_by_the_map_core|KIND 3 os is not supported"):
        build_verilog_bench("verilator", sources=["cfar_map.v", "cfar_map_tb.v"], parameters=params,
                            top="cfar_map_tb", folder=tmp_path, build=tmp_path / "build")

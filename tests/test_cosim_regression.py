"""Co-simulation regression: RTL on Icarus Verilog against the project's bit-accurate model.

Every run streams a vector set made by the real vector generator
(:func:`vectors.vector_set.write_vector_set`, whose expected words come from
the bit-accurate model) through the RTL with seeded input gaps and output
backpressure, and compares every output word. Sources beside the checks:

- ``docs/bit-true.md`` section 8: one output word per input sample, in input
  order; the CUT field carries the input sample. The mismatch tests locate
  the corrupted words from the stimulus file alone with this rule.
- ``docs/bit-true.md`` section 1: a frame ends on a sample with the last
  marker (bit ``W_in``); frame and sample indices are counted from it.
- ARM IHI 0051A (AXI4-Stream), 2.2.1: a transfer happens when TVALID and
  TREADY are both high; once TVALID is high it stays high, with TDATA
  unchanged, until the transfer. The handshake test breaks this on purpose.
  The same section lets a sink wait for TVALID before raising TREADY and
  forbids a source to wait for TREADY before raising TVALID: some runs use a
  sink that waits, and a module whose TVALID waits for TREADY must fail them.
- Geometric waiting (elementary probability): with a fraction ``p`` of cycles
  without an offered word, a word waits ``1 / (1 - p)`` cycles on average.

The matrix covers CA, GO, SO and OS (ranks ``k = 1``, ``k = 2R`` and between,
``docs/bit-true.md`` section 3); power-of-two and other reference-cell
counts; floor, half-up and half-even rounding; saturate and wrap (with a
threshold narrow enough to overflow); the skip, zero-pad, one-sided and
circular edge policies, circular on every kind; 1- to 32-bit samples. Longer runs need ``CFARVEC_LONG=1``.
The block specs are invented scenarios.
"""

from __future__ import annotations

import json
import os
import shutil
from collections import Counter
from pathlib import Path

import pytest

from cfarvec.cli import main
from hdl_tb.core_params import CORE_SOURCES
from hdl_tb.cosim import cosim, run_folder
from hdl_tb.tb_generator import write_testbench
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.fixed_arith import scale_product
from vectors.vector_set import write_vector_set

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

LONG = bool(os.environ.get("CFARVEC_LONG"))

# id: (detector, fixed, stream, narrow threshold?, gaps %, stalls %)
MATRIX = {
    "ca-r16-g2-16bit-halfup-saturate-zeropad": (
        dict(kind="ca", ref_cells_per_side=16, guard_cells_per_side=2, alpha=17.28, edge="zero-pad"),
        dict(input_bits=16, rounding="half-up", overflow="saturate"), dict(pipeline_stages=2), False, 20, 30),
    "go-r5-g1-8bit-floor-wrap-skip": (
        dict(kind="go", ref_cells_per_side=5, guard_cells_per_side=1, alpha=4.2, edge="skip"),
        dict(input_bits=8, rounding="floor", overflow="wrap"), dict(pipeline_stages=3), True, 30, 40),
    "so-r8-g0-4bit-halfeven-saturate-onesided": (
        dict(kind="so", ref_cells_per_side=8, guard_cells_per_side=0, alpha=3.3, edge="one-sided"),
        dict(input_bits=4, rounding="half-even", overflow="saturate", alpha_frac_bits=3, threshold_frac_bits=2),
        dict(pipeline_stages=2), True, 25, 25),
    "ca-r3-g2-12bit-halfeven-wrap-onesided-ge": (
        dict(kind="ca", ref_cells_per_side=3, guard_cells_per_side=2, alpha=6.1, edge="one-sided", compare=">="),
        dict(input_bits=12, rounding="half-even", overflow="wrap"), dict(pipeline_stages=1), True, 40, 20),
    "go-r4-g1-24bit-halfup-saturate-zeropad-meanbyshift": (
        dict(kind="go", ref_cells_per_side=4, guard_cells_per_side=1, alpha=5.5, edge="zero-pad"),
        dict(input_bits=24, rounding="half-up", overflow="saturate", mean_by_shift=True), dict(pipeline_stages=4),
        True, 10, 50),
    "so-r6-g3-16bit-floor-truncated-csd-skip": (
        dict(kind="so", ref_cells_per_side=6, guard_cells_per_side=3, alpha=7.9, edge="skip"),
        dict(input_bits=16, rounding="floor", truncate_partials=True, alpha_csd_digits=3, alpha_frac_bits=10),
        dict(pipeline_stages=2), False, 35, 35),
    "ca-r1-g0-1bit-floor-saturate-zeropad": (
        dict(kind="ca", ref_cells_per_side=1, guard_cells_per_side=0, alpha=2.0, edge="zero-pad"),
        dict(input_bits=1, rounding="floor", overflow="saturate"), dict(pipeline_stages=1), True, 20, 20),
    "ca-r7-g1-32bit-halfeven-wrap-zeropad": (
        dict(kind="ca", ref_cells_per_side=7, guard_cells_per_side=1, alpha=12.5, edge="zero-pad"),
        dict(input_bits=32, rounding="half-even", overflow="wrap", alpha_frac_bits=10, threshold_frac_bits=2,
             threshold_bits=29), dict(pipeline_stages=3), False, 15, 45),
    "go-r12-g2-10bit-floor-saturate-onesided-5stages": (
        dict(kind="go", ref_cells_per_side=12, guard_cells_per_side=2, alpha=3.0, edge="one-sided"),
        dict(input_bits=10, rounding="floor", overflow="saturate"), dict(pipeline_stages=5), False, 30, 30),
    "so-r2-g1-16bit-halfup-wrap-skip-ge": (
        dict(kind="so", ref_cells_per_side=2, guard_cells_per_side=1, alpha=4.4, edge="skip", compare=">="),
        dict(input_bits=16, rounding="half-up", overflow="wrap"), dict(pipeline_stages=2), True, 45, 10),
    # OS: k = 1, k = 2R and ranks between (docs/bit-true.md section 3).
    "os-r4-g1-k1-8bit-floor-saturate-zeropad": (
        dict(kind="os", ref_cells_per_side=4, guard_cells_per_side=1, rank=1, alpha=9.0, edge="zero-pad"),
        dict(input_bits=8, rounding="floor", overflow="saturate", alpha_frac_bits=4), dict(pipeline_stages=1),
        True, 20, 30),
    "os-r6-g2-k12-12bit-halfup-onesided-ge": (
        dict(kind="os", ref_cells_per_side=6, guard_cells_per_side=2, rank=12, alpha=2.4, edge="one-sided",
             compare=">="),
        dict(input_bits=12, rounding="half-up", alpha_frac_bits=6), dict(pipeline_stages=3), False, 30, 20),
    "os-r16-g2-k24-16bit-halfeven-skip": (
        dict(kind="os", ref_cells_per_side=16, guard_cells_per_side=2, rank=24, alpha=4.7, edge="skip"),
        dict(input_bits=16, rounding="half-even", alpha_frac_bits=8), dict(pipeline_stages=4), False, 15, 15),
    # Circular on every kind (docs/bit-true.md sections 2 and 9).
    "os-r8-g1-k12-14bit-halfeven-wrap-circular": (
        dict(kind="os", ref_cells_per_side=8, guard_cells_per_side=1, rank=12, alpha=3.0, edge="circular"),
        dict(input_bits=14, rounding="half-even", overflow="wrap", alpha_frac_bits=8, threshold_frac_bits=2),
        dict(pipeline_stages=2), True, 20, 30),
    "ca-r5-g1-16bit-halfup-saturate-circular": (
        dict(kind="ca", ref_cells_per_side=5, guard_cells_per_side=1, alpha=6.5, edge="circular"),
        dict(input_bits=16, rounding="half-up", overflow="saturate"), dict(pipeline_stages=2), False, 25, 25),
    "go-r3-g2-10bit-floor-wrap-circular-ge": (
        dict(kind="go", ref_cells_per_side=3, guard_cells_per_side=2, alpha=3.9, edge="circular", compare=">="),
        dict(input_bits=10, rounding="floor", overflow="wrap"), dict(pipeline_stages=5), True, 30, 10),
    "so-r4-g0-6bit-halfeven-circular": (
        dict(kind="so", ref_cells_per_side=4, guard_cells_per_side=0, alpha=3.3, edge="circular"),
        dict(input_bits=6, rounding="half-even", alpha_frac_bits=3, threshold_frac_bits=1),
        dict(pipeline_stages=1), False, 10, 40),
}


# Matrix entries whose runs use a sink that waits for TVALID (ARM IHI 0051A 2.2.1).
WAITING_SINK = {"so-r6-g3-16bit-floor-truncated-csd-skip", "ca-r7-g1-32bit-halfeven-wrap-zeropad",
                "go-r5-g1-8bit-floor-wrap-skip", "os-r6-g2-k12-12bit-halfup-onesided-ge",
                "go-r3-g2-10bit-floor-wrap-circular-ge"}


def _sink(name: str) -> str:
    return "waits-for-valid" if name in WAITING_SINK else "independent"


def _vectors(frame_length: int, window: int) -> dict:
    return {"seed": 4242, "scenario_frames": 2, "random_frames": 6, "random_length_max": max(window, frame_length)}


def _spec(name: str):
    det, fixed, stream, narrow, _, _ = MATRIX[name]
    w = 2 * det["ref_cells_per_side"] + 2 * det["guard_cells_per_side"] + 1
    frame = max(w + 8, 48)
    data = {"detector": dict(det), "fixed": dict(fixed), "stream": {**stream, "frame_length": frame},
            "vectors": _vectors(frame, w)}
    spec = spec_from_dict(data)
    if narrow:
        # Two bits fewer than the full-scale threshold needs: saturate or wrap must act.
        data["fixed"]["threshold_bits"] = max(1, spec.threshold_bits - 2)
        spec = spec_from_dict(data)
    return spec


def test_matrix_is_what_the_docstring_says():
    specs = [_spec(n) for n in MATRIX]
    assert len(specs) >= 8
    assert {s.kind for s in specs} == {"ca", "go", "so", "os"}
    assert {s.rounding for s in specs} == {"floor", "half-up", "half-even"}
    assert {s.overflow for s in specs} == {"saturate", "wrap"}
    assert {s.edge for s in specs} == {"skip", "zero-pad", "one-sided", "circular"}
    # Circular on every kind; OS with k = 1, k = 2R and a rank between.
    assert {s.kind for s in specs if s.edge == "circular"} == {"ca", "go", "so", "os"}
    os_ranks = {(s.rank, s.n_ref) for s in specs if s.kind == "os"}
    assert any(k == 1 for k, _ in os_ranks) and any(k == n for k, n in os_ranks)
    assert any(1 < k < n for k, n in os_ranks) and len({n for _, n in os_ranks}) >= 3
    n = {s.n_ref for s in specs}
    assert any(k & (k - 1) == 0 for k in n) and any(k & (k - 1) for k in n)
    assert min(s.input_bits for s in specs) <= 4 and max(s.input_bits for s in specs) >= 24
    for name, s in zip(MATRIX, specs):
        if MATRIX[name][3]:
            # docs/bit-true.md sections 5-6: the full-scale T0 no longer fits W_T bits.
            full = scale_product(s.statistic_max, s.alpha_int, s.drop_bits, s.rounding, s.truncate_partials)
            assert full > (1 << s.threshold_bits) - 1, f"{name}: a narrow threshold must overflow at full scale"
    assert {s.overflow for name, s in zip(MATRIX, specs) if MATRIX[name][3]} == {"saturate", "wrap"}


@pytest.mark.parametrize("name", sorted(MATRIX))
def test_bulk_matrix(tmp_path, name):
    gaps, stalls = MATRIX[name][4], MATRIX[name][5]
    r = cosim(_spec(name), mode="bulk", gap_percent=gaps, stall_percent=stalls, sink=_sink(name),
              folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"
    assert r.details["sink"] == _sink(name)
    assert r.words_compared == r.words_expected > 0
    assert r.mismatches == r.missing_words == r.extra_words == 0
    assert r.results_xml is not None and r.results_xml.is_file()


def test_bulk_100k_samples(tmp_path):
    r = cosim(_spec("ca-r16-g2-16bit-halfup-saturate-zeropad"), mode="bulk", samples=100_000,
              folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"
    assert r.words_expected >= 100_000 and r.words_compared == r.words_expected


@pytest.mark.parametrize("name", ["so-r8-g0-4bit-halfeven-saturate-onesided", "go-r5-g1-8bit-floor-wrap-skip"])
def test_interactive_small(tmp_path, name):
    gaps, stalls = MATRIX[name][4], MATRIX[name][5]
    r = cosim(_spec(name), mode="interactive", samples=1500, gap_percent=gaps, stall_percent=stalls,
              sink=_sink(name), folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"
    assert r.details["sink"] == _sink(name)
    assert r.words_compared == r.words_expected >= 1500
    assert r.details["handshake_errors"] == 0


def test_matrix_uses_both_kinds_of_sink():
    # ARM IHI 0051A 2.2.1 allows a sink either; both must be in the regular runs.
    assert {_sink(n) for n in MATRIX} == {"independent", "waits-for-valid"}
    assert {_sink(n) for n in ("so-r8-g0-4bit-halfeven-saturate-onesided", "go-r5-g1-8bit-floor-wrap-skip")} == {
        "independent", "waits-for-valid"}


def test_verilog_mode(tmp_path):
    folder = tmp_path / "b"
    r = cosim(_spec("ca-r3-g2-12bit-halfeven-wrap-onesided-ge"), mode="verilog", folder=folder)
    assert r.passed, f"{r.problems}"
    assert r.words_compared == r.words_expected
    assert r.details["sink"] == "independent"
    waiting = run_folder(folder, "verilog", sink="waits-for-valid")
    assert waiting.passed and waiting.details["sink"] == "waits-for-valid"
    with pytest.raises(SpecError) as err:
        run_folder(folder, "verilog", sink="lazy")
    assert err.value.field == "--sink"


def test_gaps_really_slow_the_input(tmp_path):
    # Geometric waiting: 50 % gaps make a word wait 2 cycles on average, so the
    # stream takes well over 1.5 cycles a word; without gaps or stalls about 1
    # (plus R+G drain cycles a frame, docs/bit-true.md section 9).
    spec = _spec("go-r5-g1-8bit-floor-wrap-skip")
    folder = tmp_path / "b"
    write_testbench(spec, folder, gap_percent=0, stall_percent=0)
    quiet = run_folder(folder, "bulk")
    gappy = run_folder(folder, "bulk", gap_percent=50)
    assert quiet.passed and gappy.passed
    words = quiet.words_expected
    frames = json.loads((folder / "vectors" / "manifest.json").read_text())["totals"]["frames"]
    tail = 64 + 2 * spec.half_window + spec.pipeline_stages
    assert quiet.details["cycles"] <= words + frames * spec.half_window + tail + 4 * spec.latency_cycles
    assert gappy.details["cycles"] > 1.5 * words


# ---------------------------------------------------------------- your own RTL through a port map

# A module of "your own": different port names, an active-low reset, no last
# output, the output word reversed field by field (last in bit 0, then valid,
# det, threshold, cut), and two fault switches for the tests below.
USER_RTL = """\
`timescale 1ns/1ps
module my_cfar #(
    parameter integer INPUT_BITS = 16, parameter integer REF_CELLS = 16, parameter integer GUARD_CELLS = 2,
    parameter integer KIND = 0, parameter integer OS_RANK = 1, parameter integer EDGE = 0,
    parameter integer MAX_FRAME_LENGTH = 1024, parameter integer SUM_BITS = 20,
    parameter [63:0] ALPHA_INT = 64'd2212, parameter integer DROP_BITS = 12,
    parameter integer THRESHOLD_FRAC_BITS = 0, parameter integer THRESHOLD_BITS = 21,
    parameter integer ROUNDING = 1, parameter integer OVERFLOW = 0, parameter integer COMPARE_GE = 0,
    parameter integer TRUNCATE_PARTIALS = 0, parameter integer PIPELINE_STAGES = 2, parameter integer SRST_LEVEL = 0,
    // >= 0: flip the det bit of every word whose CUT equals this value.
    parameter integer CORRUPT_CUT = -1,
    // 1: toggle the top CUT bit while a word waits for dout_rdy (breaks the handshake rule, not the word).
    parameter integer WOBBLE = 0,
    // >= 0: after this many output words, hide dout_vld (every later word is lost).
    parameter integer LOSE_AFTER = -1
) (
    input  wire clock,
    input  wire rst_n,
    input  wire [INPUT_BITS-1:0] din,
    input  wire din_vld,
    output wire din_rdy,
    input  wire din_end,
    output wire [INPUT_BITS+THRESHOLD_BITS+2:0] dout,
    output wire dout_vld,
    input  wire dout_rdy
);
    localparam integer W = INPUT_BITS + THRESHOLD_BITS + 3;
    wire [W-1:0] w;
    wire unused_last;
    wire core_vld;
    reg  wobble_reg = 1'b0;
    integer sent = 0;
    cfar_stream #(.INPUT_BITS(INPUT_BITS), .REF_CELLS(REF_CELLS), .GUARD_CELLS(GUARD_CELLS), .KIND(KIND),
        .OS_RANK(OS_RANK), .EDGE(EDGE), .MAX_FRAME_LENGTH(MAX_FRAME_LENGTH), .SUM_BITS(SUM_BITS), .ALPHA_INT(ALPHA_INT), .DROP_BITS(DROP_BITS),
        .THRESHOLD_FRAC_BITS(THRESHOLD_FRAC_BITS), .THRESHOLD_BITS(THRESHOLD_BITS), .ROUNDING(ROUNDING),
        .OVERFLOW(OVERFLOW), .COMPARE_GE(COMPARE_GE), .TRUNCATE_PARTIALS(TRUNCATE_PARTIALS),
        .PIPELINE_STAGES(PIPELINE_STAGES), .SRST_LEVEL(SRST_LEVEL))
      u_core (.clk(clock), .srst(rst_n), .s_axis_tdata(din), .s_axis_tvalid(din_vld), .s_axis_tready(din_rdy),
              .s_axis_tlast(din_end), .m_axis_tdata(w), .m_axis_tvalid(core_vld), .m_axis_tready(dout_rdy),
              .m_axis_tlast(unused_last));
    always @(posedge clock) wobble_reg <= ~wobble_reg;
    always @(posedge clock) if (core_vld && dout_rdy) sent <= sent + 1;
    assign dout_vld = core_vld && (LOSE_AFTER < 0 || sent < LOSE_AFTER);
    wire flip = (CORRUPT_CUT >= 0) && (w[INPUT_BITS-1:0] == CORRUPT_CUT);
    wire wob  = (WOBBLE != 0) && dout_vld && !dout_rdy && wobble_reg;
    wire [W-1:0] w2 = w ^ ({{(W-1){1'b0}}, flip} << (INPUT_BITS + THRESHOLD_BITS))
                        ^ ({{(W-1){1'b0}}, wob} << (INPUT_BITS - 1));
    assign dout = {w2[INPUT_BITS-1:0], w2[INPUT_BITS+THRESHOLD_BITS-1:INPUT_BITS], w2[W-3], w2[W-2], w2[W-1]};
endmodule
"""


def _user_spec(extra_params: dict | None = None):
    spec = _spec("go-r5-g1-8bit-floor-wrap-skip")
    w_in, w_t = spec.input_bits, spec.threshold_bits
    data = spec.to_dict()
    data["ports"] = {
        "module": "my_cfar", "clock": "clock", "reset": "rst_n", "reset_active": "low",
        "in_data": "din", "in_valid": "din_vld", "in_ready": "din_rdy", "in_last": "din_end",
        "out_data": "dout", "out_valid": "dout_vld", "out_ready": "dout_rdy", "out_last": "",
        "core_parameters": True,
        "out_fields": {"last": 0, "valid": 1, "det": 2, "threshold": 3, "cut": 3 + w_t},
        "parameters": extra_params or {},
    }
    data["fixed"]["threshold_bits"] = w_t
    assert w_in == 8
    return spec_from_dict(data)


@pytest.fixture()
def user_rtl(tmp_path):
    f = tmp_path / "my_cfar.sv"
    f.write_text(USER_RTL)
    return [f, *CORE_SOURCES]


@pytest.mark.parametrize("mode", ["bulk", "interactive", "verilog"])
def test_user_rtl_through_the_port_map(tmp_path, user_rtl, mode):
    r = cosim(_user_spec(), rtl=user_rtl, mode=mode, samples=1200, folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"
    assert r.module == "my_cfar" and r.words_compared == r.words_expected >= 1200


def _first_with_cut(folder: Path, input_bits: int, value: int, words: int) -> tuple[int, int, int, int]:
    """(index, frame, sample, count) of the words whose CUT is ``value``, from the stimulus file alone."""
    stim = [int(t, 16) for t in (folder / "vectors" / "stimulus.hex").read_text().split()][:words]
    hits = [i for i, w in enumerate(stim) if w & ((1 << input_bits) - 1) == value]
    first = hits[0]
    ends = [i for i, w in enumerate(stim) if w >> input_bits & 1]
    frame = sum(1 for e in ends if e < first)
    start = ends[frame - 1] + 1 if frame else 0
    return first, frame, first - start, len(hits)


def _common_cut(tmp_path: Path, words: int) -> int:
    """A non-zero sample value that occurs several times in the first ``words`` samples of the set."""
    write_vector_set(_user_spec(), tmp_path / "probe-vectors")
    stim = [int(t, 16) & 0xFF for t in (tmp_path / "probe-vectors" / "stimulus.hex").read_text().split()][:words]
    return Counter(v for v in stim if v).most_common(1)[0][0]


@pytest.mark.parametrize("mode", ["bulk", "interactive", "verilog"])
def test_a_wrong_word_is_located(tmp_path, user_rtl, mode):
    value = _common_cut(tmp_path, 1200)
    folder = tmp_path / "b"
    r = cosim(_user_spec({"CORRUPT_CUT": value}), rtl=user_rtl, mode=mode, samples=1200, folder=folder)
    first, frame, sample, count = _first_with_cut(folder, 8, value, r.words_expected)
    assert count >= 2
    assert not r.passed
    assert r.mismatches == count
    expected = [int(t, 16) for t in (folder / "vectors" / "expected.hex").read_text().split()][first]
    det = expected >> (8 + _user_spec().threshold_bits) & 1
    if mode == "verilog":
        assert r.first_mismatch.startswith(f"word {first} frame {frame} sample {sample} cut {value}:")
        assert f"det={det} " in r.first_mismatch and f"det={1 - det} " in r.first_mismatch
    else:
        assert r.first_mismatch.startswith(f"word {first} (frame {frame}, sample {sample}, CUT {value}):")
        assert f"expected T=" in r.first_mismatch
        assert f" det={det} " in r.first_mismatch and f" det={1 - det} " in r.first_mismatch


@pytest.mark.parametrize("mode", ["bulk", "interactive"])
def test_a_handshake_violation_is_caught(tmp_path, user_rtl, mode):
    # ARM IHI 0051A 2.2.1: TDATA must not change while TVALID waits for TREADY. The
    # wobble changes it only then, so every transferred word is still right.
    r = cosim(_user_spec({"WOBBLE": 1}), rtl=user_rtl, mode=mode, samples=800, stall_percent=50,
              folder=tmp_path / "b")
    assert not r.passed
    assert r.mismatches == 0 and r.words_compared == r.words_expected
    assert r.details["handshake_errors"] > 0
    assert any("handshake" in p for p in r.problems)


@pytest.mark.parametrize("mode", ["bulk", "interactive"])
def test_lost_words_end_in_a_timeout(tmp_path, user_rtl, mode):
    r = cosim(_user_spec({"LOSE_AFTER": 300}), rtl=user_rtl, mode=mode, samples=600, folder=tmp_path / "b")
    assert not r.passed
    assert r.words_compared == 300 and r.missing_words == r.words_expected - 300 and r.mismatches == 0
    assert r.details["timed_out"]
    assert any("never arrived" in p for p in r.problems) and any("timed out" in p for p in r.problems)


def _core_copy(folder: Path, find: str, replace: str) -> Path:
    """A copy of the reference core with one change, under its own name (so the port map stays the default)."""
    core = CORE_SOURCES[0].read_text(encoding="ascii")
    assert core.count(find) == 1
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / CORE_SOURCES[0].name
    path.write_text(core.replace(find, replace), encoding="ascii")
    return path


@pytest.mark.parametrize("mode", ["bulk", "interactive"])
def test_waiting_sink_catches_a_tvalid_that_waits_for_tready(tmp_path, mode):
    # ARM IHI 0051A 2.2.1: a source must not wait for TREADY before asserting TVALID. Such a module
    # offers nothing to a sink that waits for TVALID; the watchdog must end the run, not the timeout.
    core = _core_copy(tmp_path / "rtl", "assign m_axis_tvalid = out_valid;",
                      "assign m_axis_tvalid = out_valid & m_axis_tready;")
    r = cosim(_spec("ca-r1-g0-1bit-floor-saturate-zeropad"), rtl=[core], mode=mode, samples=200,
              sink="waits-for-valid", folder=tmp_path / "b")
    assert not r.passed
    assert r.words_compared == 0 and r.missing_words == r.words_expected
    assert r.details["deadlocked"] and not r.details["timed_out"]
    assert any(p.startswith("output never became valid while the sink waited for TVALID") for p in r.problems)


# Spliced into a copy of the core: TREADY high in a cycle needs a word seen waiting (TVALID high,
# TREADY low) in the cycle before; the first transfer is announced so that an empty log cannot pass.
_PROBE = """
    reg probe_seen_reg = 1'b0;
    reg probe_said_reg = 1'b0;
    always @(posedge clk) begin
        if (!rst && m_axis_tready === 1'b1 && !probe_seen_reg)
            $display("PROBE: m_axis_tready high with no word seen waiting in the cycle before");
        if (m_axis_tvalid === 1'b1 && m_axis_tready === 1'b1 && !probe_said_reg)
            $display("PROBE: first transfer");
        probe_said_reg <= probe_said_reg || (m_axis_tvalid === 1'b1 && m_axis_tready === 1'b1);
        probe_seen_reg <= m_axis_tvalid === 1'b1 && m_axis_tready !== 1'b1;
    end

    assign m_axis_tlast  = out_word_reg[OUT_BITS-1];

endmodule
"""


@pytest.mark.parametrize("mode", ["bulk", "interactive"])
def test_waiting_sink_raises_tready_only_for_a_word_it_has_seen(tmp_path, mode):
    # ARM IHI 0051A 2.2.1: the sink may wait for TVALID; this one must never raise TREADY before it.
    core = _core_copy(tmp_path / "rtl", "\n    assign m_axis_tlast  = out_word_reg[OUT_BITS-1];\n\nendmodule\n", _PROBE)
    r = cosim(_spec("so-r2-g1-16bit-halfup-wrap-skip-ge"), rtl=[core], mode=mode, samples=300, stall_percent=40,
              sink="waits-for-valid", folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"
    log = r.log_file.read_text(errors="replace")
    assert "PROBE: first transfer" in log
    assert "PROBE: m_axis_tready high" not in log


@pytest.mark.parametrize("mode", ["bulk", "interactive", "verilog"])
def test_reference_core_with_an_active_low_reset(tmp_path, mode):
    data = _spec("so-r2-g1-16bit-halfup-wrap-skip-ge").to_dict()
    data["ports"] = {"reset_active": "low"}
    r = cosim(spec_from_dict(data), mode=mode, samples=600, folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"


@pytest.mark.parametrize("mode, suffix", [("bulk", ".fst"), ("verilog", ".vcd")])
def test_waveform_on_request(tmp_path, mode, suffix):
    r = cosim(_spec("ca-r1-g0-1bit-floor-saturate-zeropad"), mode=mode, samples=100, waves=True,
              folder=tmp_path / "b")
    assert r.passed
    assert r.waves is not None and r.waves.suffix == suffix and r.waves.stat().st_size > 0


# ---------------------------------------------------------------- the CLI: exit codes and one-line errors

def _write_spec(tmp_path: Path, spec) -> Path:
    lines = []
    for section, values in spec.to_dict().items():
        if section == "detector":
            values = {k: v for k, v in values.items() if k != "design_pfa"}
        simple = {k: v for k, v in values.items() if not isinstance(v, dict)}
        lines.append(f"[{section}]")
        lines += [f"{k} = {json.dumps(v)}" for k, v in simple.items()]
        for k, v in values.items():
            if isinstance(v, dict):
                lines.append(f"[{section}.{k}]")
                lines += [f"{kk} = {json.dumps(vv)}" for kk, vv in v.items()]
    p = tmp_path / "spec.toml"
    p.write_text("\n".join(lines) + "\n")
    return p


def test_cli_pass_and_mismatch_exit_codes(tmp_path, user_rtl, capsys):
    rtl = [str(f) for f in user_rtl]
    good = _write_spec(tmp_path, _user_spec())
    assert main(["cosim", str(good), "--rtl", *rtl, "--samples", "400", "--sink", "waits-for-valid"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("PASS") and "words compared" in out and "samples/s" in out
    assert "output sink      waits-for-valid" in out
    bad_dir = tmp_path / "bad"
    bad_dir.mkdir()
    bad = _write_spec(bad_dir, _user_spec({"CORRUPT_CUT": _common_cut(tmp_path, 1200)}))
    assert main(["cosim", str(bad), "--rtl", *rtl, "--samples", "1200"]) == 1
    out = capsys.readouterr().out
    assert out.startswith("FAIL") and "first mismatch   word" in out


def test_cli_example_os_circular_passes(capsys):
    # examples/channel_os.toml: OS (rank 12 of 16) under the circular policy, the reference core.
    example = Path(__file__).resolve().parents[1] / "examples" / "channel_os.toml"
    assert main(["cosim", str(example), "--samples", "3000"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("PASS") and "words compared" in out


def _one_line_error(capsys, argv: list[str], field: str) -> str:
    assert main(argv) == 2
    captured = capsys.readouterr()
    assert captured.err.count("\n") == 1, captured.err
    assert captured.err.startswith(f"cfarvec cosim: error: {field}"), captured.err
    return captured.err


def test_cli_port_the_module_lacks(tmp_path, user_rtl, capsys):
    spec = _user_spec()
    data = spec.to_dict()
    data["ports"]["in_valid"] = "din_valid"
    path = _write_spec(tmp_path, spec_from_dict(data))
    err = _one_line_error(capsys, ["cosim", str(path), "--rtl", *map(str, user_rtl)], "ports.in_valid")
    assert "'din_valid'" in err and "'my_cfar'" in err


def test_cli_module_not_in_the_rtl(tmp_path, user_rtl, capsys):
    path = _write_spec(tmp_path, _user_spec())
    err = _one_line_error(capsys, ["cosim", str(path), "--rtl", *map(str, user_rtl), "--top", "their_cfar"],
                          "--top")
    assert "'their_cfar'" in err


def test_cli_rtl_that_does_not_compile(tmp_path, user_rtl, capsys):
    path = _write_spec(tmp_path, _user_spec())
    broken = tmp_path / "broken.v"
    broken.write_text("module broken(input a; endmodule\n")
    err = _one_line_error(capsys, ["cosim", str(path), "--rtl", *map(str, user_rtl), str(broken)], "--rtl")
    assert "does not compile" in err and "broken.v" in err
    # The module's own sub-module missing is a compile error too.
    err = _one_line_error(capsys, ["cosim", str(path), "--rtl", str(user_rtl[0])], "--rtl")
    assert "cfar_stream" in err


def test_cli_missing_simulator(tmp_path, capsys, monkeypatch):
    path = _write_spec(tmp_path, _spec("ca-r1-g0-1bit-floor-saturate-zeropad"))
    monkeypatch.setenv("PATH", str(tmp_path))
    err = _one_line_error(capsys, ["cosim", str(path)], "simulator")
    assert "iverilog" in err


def test_cli_bad_spec_and_options(tmp_path, capsys):
    path = _write_spec(tmp_path, _spec("ca-r1-g0-1bit-floor-saturate-zeropad"))
    bad = tmp_path / "bad.toml"
    bad.write_text(path.read_text().replace("kind = \"ca\"", "kind = \"median\""))
    _one_line_error(capsys, ["cosim", str(bad)], "detector.kind")
    os_spec = tmp_path / "os.toml"
    os_spec.write_text("[detector]\nkind = \"os\"\nref_cells_per_side = 4\nrank = 9\nalpha = 5.0\n")
    _one_line_error(capsys, ["cosim", str(os_spec)], "detector.rank")
    _one_line_error(capsys, ["cosim", str(path), "--samples", "0"], "--samples")
    _one_line_error(capsys, ["cosim", str(path), "--stalls", "99"], "--stalls")
    _one_line_error(capsys, ["cosim", str(tmp_path / "missing.toml")], "SPEC")
    for bad_choice in (["--mode", "fastest"], ["--sink", "lazy"]):
        with pytest.raises(SystemExit) as stop:  # argparse usage errors: one line, exit code 2 (cfarvec/cli.py)
            main(["cosim", str(path), *bad_choice])
        assert stop.value.code == 2
        assert capsys.readouterr().err.count("\n") == 1


# ---------------------------------------------------------------- long runs

@pytest.mark.slow
@pytest.mark.skipif(not LONG, reason="long co-simulation; set CFARVEC_LONG=1")
@pytest.mark.parametrize("name", sorted(MATRIX))
def test_long_interactive_matrix(tmp_path, name):
    r = cosim(_spec(name), mode="interactive", samples=20_000, sink=_sink(name), folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"


@pytest.mark.slow
@pytest.mark.skipif(not LONG, reason="long co-simulation; set CFARVEC_LONG=1")
@pytest.mark.parametrize("name", sorted(MATRIX))
def test_long_bulk_million(tmp_path, name):
    r = cosim(_spec(name), mode="bulk", samples=1_000_000, sink=_sink(name), folder=tmp_path / "b")
    assert r.passed, f"{r.problems}"

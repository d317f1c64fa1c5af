"""The reference Verilog core against the bit-accurate model, through the pure-Verilog testbench.

Every configuration below builds a stimulus stream in the test (random
samples, frames of several lengths including one exactly one window long,
full-scale and all-zero runs), computes the expected words with the project's
bit-accurate model (``refmodel.fixedpoint.pipeline_struct.run_structural``, the
cycle-stepped model that is the executable form of the contract; else
``refmodel.fixedpoint.pipeline_fast.run_fast``), writes both as ``$readmemh``
files (IEEE Std 1364-2005, section 17.2.9) and runs
``hdl_tb/rtl/cfar_stream_tb.v`` under Icarus Verilog, which must print PASS.
The bench itself also checks the AXI4-Stream output handshake (ARM IHI 0051A,
section 2.2.1: once TVALID is high it stays high with TDATA stable until the
transfer), the drain of ``docs/bit-true.md`` section 9 and, at full rate, the
latency ``R + G + pipeline_stages`` (under ``circular``, section 9: input
refused for ``L + 2(R + G)`` cycles after each frame, latency
``L + 2(R + G) + pipeline_stages``). The configurations cover every kind
(CA, GO, SO and OS with ``k = 1``, ``k = 2R`` and ranks between) and every
edge policy. Some configurations run with a sink that
waits for TVALID before raising TREADY (allowed to a sink by ARM IHI 0051A,
section 2.2.1), under which a core whose TVALID waits for TREADY deadlocks.

Long runs (more configurations, longer streams) need ``CFARVEC_LONG=1``.
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import numpy as np
import pytest

from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.fixed_arith import scale_product
from refmodel.fixedpoint.word_format import output_field_offsets, pack_input

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

from refmodel.fixedpoint.pipeline_struct import run_structural  # noqa: E402
from hdl_tb.core_params import BENCH_SOURCE, CORE_SOURCES, core_parameters  # noqa: E402
from hdl_tb.verilog_bench import BenchCompileError, compile_bench, count_hex_words, run_bench  # noqa: E402

LONG = bool(os.environ.get("CFARVEC_LONG"))


def _model():
    """The project's bit-accurate model (the structural model, the executable docs/bit-true.md)."""
    return "refmodel.fixedpoint.pipeline_struct.run_structural", run_structural


def _pack_words(spec, out) -> list[int]:
    """Output words as Python ints (section 8 of docs/bit-true.md), packed field by field."""
    offsets = output_field_offsets(spec)
    cols = {name: [int(v) for v in np.asarray(getattr(out, name))] for name in offsets}
    words = []
    for i in range(len(out)):
        w = 0
        for name, (lsb, width) in offsets.items():
            v = cols[name][i]
            assert 0 <= v < (1 << width), f"model field {name}={v} does not fit {width} bits"
            w |= v << lsb
        words.append(w)
    return words


def _stimulus(spec, rng: np.random.Generator, n_target: int) -> tuple[np.ndarray, np.ndarray]:
    """Random frames of different lengths with full-scale and zero runs; the first is one window long."""
    w = spec.window_length
    top = (1 << spec.input_bits) - 1
    lengths = [w, w + 1, 3 * w + 5]
    while sum(lengths) < n_target:
        lengths.append(int(rng.integers(w, max(w + 2, 6 * w))))
    frames = []
    for k, length in enumerate(lengths):
        x = rng.integers(0, top + 1, length)
        if k == 1:
            x[:] = top                                   # a whole frame at full scale
        elif k == 2:
            x[:] = 0                                     # a whole frame of zeros
        else:
            for value in (top, 0):                       # a full-scale run and a zero run inside the frame
                run = int(rng.integers(1, w + 2))
                start = int(rng.integers(0, max(1, length - run)))
                x[start:start + run] = value
        frames.append(x)
    samples = np.concatenate(frames).astype(np.int64)
    last = np.zeros(samples.size, dtype=bool)
    last[np.cumsum(lengths) - 1] = True
    return samples, last


def _write_set(folder: Path, spec, samples, last, words) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    in_digits = -(-spec.input_word_bits // 4)
    out_digits = -(-spec.output_bits // 4)
    (folder / "stimulus.hex").write_text(
        "".join(f"{int(v):0{in_digits}x}\n" for v in pack_input(spec, samples, last)), encoding="ascii")
    (folder / "expected.hex").write_text("".join(f"{v:0{out_digits}x}\n" for v in words), encoding="ascii")


def _spec(kind, r, g, *, alpha, edge="skip", compare=">", stages=2, rank=None, **fixed):
    det = {"kind": kind, "ref_cells_per_side": r, "guard_cells_per_side": g, "alpha": alpha, "edge": edge,
           "compare": compare}
    if rank is not None:
        det["rank"] = rank
    return spec_from_dict({"detector": det, "fixed": fixed, "stream": {"pipeline_stages": stages}})


# id: (spec arguments, bench arguments, samples)
CONFIGS = {
    "ca-r16-g2-16bit-default-gaps-stalls": (
        dict(kind="ca", r=16, g=2, alpha=17.28), dict(gap_percent=20, stall_percent=30), 3000),
    "ca-r5-4bit-floor-wrap-zeropad-ge-1stage": (
        dict(kind="ca", r=5, g=1, alpha=6.0, edge="zero-pad", compare=">=", stages=1, input_bits=4,
             rounding="floor", overflow="wrap", threshold_bits=5), {}, 1500),
    "go-r8-g0-4bit-halfeven-ties-saturate-onesided-3stages": (
        dict(kind="go", r=8, g=0, alpha=3.3, edge="one-sided", stages=3, input_bits=4, alpha_frac_bits=3,
             threshold_frac_bits=2, rounding="half-even", overflow="saturate", threshold_bits=5),
        dict(gap_percent=30, stall_percent=30, seed=7), 1500),
    "so-r3-g2-16bit-halfup-wrap-skip-ge-4stages": (
        dict(kind="so", r=3, g=2, alpha=4.1, compare=">=", stages=4, input_bits=16, rounding="half-up",
             overflow="wrap", threshold_bits=14), dict(gap_percent=40, seed=3), 1500),
    "ca-r4-12bit-meanbyshift-halfeven-onesided-5stages": (
        dict(kind="ca", r=4, g=1, alpha=5.7, edge="one-sided", stages=5, input_bits=12, mean_by_shift=True,
             rounding="half-even", alpha_frac_bits=6, threshold_frac_bits=2), dict(stall_percent=50, seed=11), 1500),
    "go-r6-g3-8bit-truncated-csd-zeropad-ge": (
        dict(kind="go", r=6, g=3, alpha=7.9, edge="zero-pad", compare=">=", input_bits=8, truncate_partials=True,
             alpha_csd_digits=3, rounding="floor", alpha_frac_bits=10), dict(gap_percent=25, stall_percent=25), 1500),
    "so-r1-g0-4bit-floor-saturate-onesided-1stage": (
        dict(kind="so", r=1, g=0, alpha=2.5, edge="one-sided", stages=1, input_bits=4, rounding="floor",
             overflow="saturate", threshold_bits=3), dict(gap_percent=10, stall_percent=10, seed=5), 600),
    "ca-r8-16bit-truncated-meanbyshift-fracbits-6stages": (
        dict(kind="ca", r=8, g=2, alpha=9.2, stages=6, input_bits=16, truncate_partials=True, mean_by_shift=True,
             rounding="floor", alpha_frac_bits=8, threshold_frac_bits=3), dict(gap_percent=15, seed=2), 1500),
    "ca-r7-32bit-64bit-word-halfeven-saturate-zeropad-g2012": (
        dict(kind="ca", r=7, g=1, alpha=12.5, edge="zero-pad", stages=3, input_bits=32, rounding="half-even",
             alpha_frac_bits=10, threshold_frac_bits=1, threshold_bits=29), dict(stall_percent=20, generation="2012"),
        1200),
    "go-r9-24bit-halfeven-fracbits-zeropad-waiting-sink": (
        dict(kind="go", r=9, g=1, alpha=5.5, edge="zero-pad", stages=2, input_bits=24, rounding="half-even",
             alpha_frac_bits=10, threshold_frac_bits=2), dict(gap_percent=10, sink="waits-for-valid"), 1200),
    "so-r12-8bit-floor-skip-16stages-stalls-waiting-sink": (
        dict(kind="so", r=12, g=2, alpha=3.0, stages=16, input_bits=8, rounding="floor"),
        dict(stall_percent=60, seed=13, sink="waits-for-valid"), 1500),
    "ca-r2-g1-16bit-halfup-wrap-onesided-ge-g2012": (
        dict(kind="ca", r=2, g=1, alpha=4.4, edge="one-sided", compare=">=", input_bits=16, rounding="half-up",
             overflow="wrap", threshold_bits=15), dict(generation="2012"), 1200),
    # OS (docs/bit-true.md section 3: the k-th smallest of the 2R reference cells; one-sided: the
    # ceil(k/2)-th of the complete side), k = 1, k = 2R and ranks between, every edge policy.
    "os-r8-g1-k12-16bit-halfup-skip-gaps-stalls": (
        dict(kind="os", r=8, g=1, rank=12, alpha=3.0, input_bits=16, rounding="half-up"),
        dict(gap_percent=20, stall_percent=30), 1500),
    "os-r4-g1-k1-4bit-floor-zeropad-ge-1stage": (
        dict(kind="os", r=4, g=1, rank=1, alpha=6.0, edge="zero-pad", compare=">=", stages=1, input_bits=4,
             rounding="floor", overflow="saturate", alpha_frac_bits=4, threshold_bits=5),
        dict(gap_percent=15, stall_percent=15), 1200),
    "os-r4-g2-k8-8bit-halfeven-onesided-3stages": (
        dict(kind="os", r=4, g=2, rank=8, alpha=2.2, edge="one-sided", stages=3, input_bits=8,
             rounding="half-even", alpha_frac_bits=3, threshold_frac_bits=1), dict(stall_percent=40, seed=4), 1200),
    "os-r5-g0-k3-12bit-wrap-onesided-5stages-waiting-sink": (
        dict(kind="os", r=5, g=0, rank=3, alpha=4.5, edge="one-sided", stages=5, input_bits=12, overflow="wrap",
             threshold_bits=12), dict(gap_percent=10, stall_percent=20, sink="waits-for-valid"), 1200),
    "os-r1-g0-k2-4bit-onesided-full-rate": (
        dict(kind="os", r=1, g=0, rank=2, alpha=2.0, edge="one-sided", input_bits=4), {}, 600),
    "os-r16-g2-k24-16bit-zeropad-4stages-g2012": (
        dict(kind="os", r=16, g=2, rank=24, alpha=5.0, edge="zero-pad", stages=4, input_bits=16),
        dict(gap_percent=20, stall_percent=20, generation="2012"), 1500),
    # Circular (docs/bit-true.md sections 2 and 9: x[i mod L], the frame stored and replayed) on every kind.
    "os-r8-g1-k12-14bit-halfeven-wrap-circular": (
        dict(kind="os", r=8, g=1, rank=12, alpha=3.0, edge="circular", input_bits=14, rounding="half-even",
             overflow="wrap", alpha_frac_bits=8, threshold_frac_bits=2, threshold_bits=15),
        dict(gap_percent=20, stall_percent=30), 1500),
    "os-r3-g1-k6-8bit-circular-1stage-full-rate": (
        dict(kind="os", r=3, g=1, rank=6, alpha=2.5, edge="circular", stages=1, input_bits=8), {}, 1200),
    "ca-r4-g1-12bit-circular-full-rate": (
        dict(kind="ca", r=4, g=1, alpha=5.0, edge="circular", input_bits=12), {}, 1200),
    "go-r6-g2-16bit-floor-circular-4stages-waiting-sink": (
        dict(kind="go", r=6, g=2, alpha=4.0, edge="circular", stages=4, input_bits=16, rounding="floor"),
        dict(gap_percent=25, stall_percent=25, sink="waits-for-valid"), 1200),
    "so-r2-g0-8bit-truncated-circular-6stages": (
        dict(kind="so", r=2, g=0, alpha=3.7, edge="circular", stages=6, input_bits=8, truncate_partials=True,
             alpha_csd_digits=2, rounding="floor", alpha_frac_bits=6), dict(gap_percent=30, stall_percent=10), 1200),
}

# Configurations whose threshold width is deliberately too narrow: full-scale
# windows must overflow it, so saturation or wrap really happens.
NARROW = {k for k, (s, _, _) in CONFIGS.items() if "threshold_bits" in s}


def _run_config(tmp_path, spec, bench, n, seed, *, params=None):
    model_name, model = _model()
    rng = np.random.default_rng(seed)
    samples, last = _stimulus(spec, rng, n)
    out = model(spec, samples, last)
    assert len(out) == samples.size, f"{model_name} returned {len(out)} words for {samples.size} samples"
    words = _pack_words(spec, out)
    _write_set(tmp_path, spec, samples, last, words)
    result = run_bench(params if params is not None else spec, tmp_path, build_root=tmp_path.parent / "vbuild",
                       **bench)
    return result, words, out


@pytest.mark.parametrize("name", sorted(CONFIGS))
def test_core_matches_bit_accurate_model(tmp_path, name):
    spec_args, bench, n = CONFIGS[name]
    spec = _spec(**spec_args)
    if name in NARROW:
        full_t0 = scale_product(spec.statistic_max, spec.alpha_int, spec.drop_bits, spec.rounding,
                                spec.truncate_partials)
        assert full_t0 > (1 << spec.threshold_bits) - 1, "the narrow threshold width must overflow at full scale"
    if "ties" in name:
        # d = 1 with an odd A: every odd statistic gives an exact half, so half-even ties occur.
        assert spec.drop_bits == 1 and spec.alpha_int % 2 == 1
    result, words, out = _run_config(tmp_path, spec, bench, n, seed=sum(map(ord, name)))
    assert result.passed, f"{result.n_mismatches} errors, first: {result.first_mismatch}\n{result.log[-2000:]}"
    assert result.n_words == len(words)
    received = [int(t, 16) for t in result.received_file.read_text().split()]
    assert received == words
    if name in NARROW and spec.overflow == "saturate":
        assert int(np.max(out.threshold)) == (1 << spec.threshold_bits) - 1


def test_active_low_reset(tmp_path):
    spec = _spec("go", 4, 1, alpha=5.0, edge="zero-pad", input_bits=8)
    params = core_parameters(spec, srst_level=0)
    assert params["SRST_LEVEL"] == 0
    result, words, _ = _run_config(tmp_path, spec, dict(gap_percent=20, stall_percent=20), 600, seed=99,
                                   params=params)
    assert result.passed, result.first_mismatch


def test_bench_reports_a_wrong_word(tmp_path):
    """A corrupted expected threshold makes the bench fail and name frame, sample and fields."""
    spec = _spec("ca", 4, 1, alpha=3.0, input_bits=8)
    _, model = _model()
    rng = np.random.default_rng(4)
    samples, last = _stimulus(spec, rng, 200)
    words = _pack_words(spec, model(spec, samples, last))
    ends = np.flatnonzero(last)
    idx = int(ends[2]) + 1 + spec.half_window + 3      # a cell of the fourth frame
    t_lsb, t_w = output_field_offsets(spec)["threshold"]
    t_exp = ((words[idx] >> t_lsb) & ((1 << t_w) - 1)) ^ 1
    words[idx] ^= 1 << t_lsb
    _write_set(tmp_path, spec, samples, last, words)
    result = run_bench(spec, tmp_path, stall_percent=30, gap_percent=20, build_root=tmp_path / "b")
    assert not result.passed
    assert result.n_mismatches == 1
    sample = spec.half_window + 3
    assert result.first_mismatch.startswith(f"word {idx} frame 3 sample {sample} cut {samples[idx]}:")
    assert f"expected T={t_exp} " in result.first_mismatch
    assert "FAIL 1 first=" in result.log


def _positions(last) -> list[tuple[int, int]]:
    """(frame, sample index within the frame) of every word, from the last markers (docs/bit-true.md 1)."""
    out, frame, sample = [], 0, 0
    for flag in last:
        out.append((frame, sample))
        frame, sample = (frame + 1, 0) if flag else (frame, sample + 1)
    return out


def test_bench_counts_every_wrong_word_and_prints_the_first_few(tmp_path):
    """Every word wrong: all are counted, MAX_REPORTS lines are printed, each names its frame and sample."""
    spec = _spec("go", 3, 1, alpha=4.0, input_bits=8)
    _, model = _model()
    samples, last = _stimulus(spec, np.random.default_rng(21), 240)
    words = _pack_words(spec, model(spec, samples, last))
    t_lsb, _ = output_field_offsets(spec)["threshold"]
    _write_set(tmp_path, spec, samples, last, [w ^ (1 << t_lsb) for w in words])
    n = len(words)
    where = _positions(last)
    assert len({f for f, _ in where}) >= 4

    result = run_bench(spec, tmp_path, gap_percent=20, stall_percent=30, build_root=tmp_path / "b")
    assert not result.passed and result.n_mismatches == n
    lines = [ln for ln in result.log.splitlines() if ln.startswith("MISMATCH")]
    assert len(lines) == 10
    assert f"... {n - 10} more errors not printed (MAX_REPORTS=10)" in result.log

    result = run_bench(spec, tmp_path, build_root=tmp_path / "b", max_reports=n)
    assert result.n_mismatches == n and "more errors not printed" not in result.log
    lines = [ln for ln in result.log.splitlines() if ln.startswith("MISMATCH")]
    assert [ln.split(":")[0] for ln in lines] == [
        f"MISMATCH word {i} frame {f} sample {k} cut {samples[i]}" for i, (f, k) in enumerate(where)]

    result = run_bench(spec, tmp_path, build_root=tmp_path / "b", max_reports=0)
    assert result.n_mismatches == n and not any(ln.startswith("MISMATCH") for ln in result.log.splitlines())
    assert result.first_mismatch.startswith("word 0 frame 0 sample 0 ")


def test_bench_reports_a_missing_word(tmp_path):
    """An expected file one word short is an error, not a pass."""
    spec = _spec("so", 2, 0, alpha=3.0, input_bits=4)
    _, model = _model()
    samples, last = _stimulus(spec, np.random.default_rng(8), 60)
    words = _pack_words(spec, model(spec, samples, last))
    _write_set(tmp_path, spec, samples, last, words[:-1])
    result = run_bench(spec, tmp_path, build_root=tmp_path / "b")
    assert not result.passed


def _timing_set(tmp_path):
    spec = _spec("ca", 4, 1, alpha=3.0, input_bits=8)
    _, model = _model()
    samples, last = _stimulus(spec, np.random.default_rng(12), 150)
    _write_set(tmp_path, spec, samples, last, _pack_words(spec, model(spec, samples, last)))
    return spec


def test_bench_catches_a_core_with_one_stage_too_many(tmp_path):
    """Same words, one cycle late: only the latency check (R + G + pipeline_stages, bit-true.md 9) sees it."""
    spec = _timing_set(tmp_path)
    bench = BENCH_SOURCE.read_text(encoding="ascii")
    wrong = bench.replace(".PIPELINE_STAGES    (PIPELINE_STAGES),", ".PIPELINE_STAGES    (PIPELINE_STAGES + 1),")
    assert wrong != bench
    (tmp_path / "tb_late.v").write_text(wrong, encoding="ascii")
    late = run_bench(spec, tmp_path, build_root=tmp_path / "b", bench_source=tmp_path / "tb_late.v")
    assert not late.passed and late.first_mismatch == "latency differs from R+G+PIPELINE_STAGES at full rate"
    # With stalls the latency is not fixed, the words are still right.
    assert run_bench(spec, tmp_path, stall_percent=30, build_root=tmp_path / "b",
                     bench_source=tmp_path / "tb_late.v").passed


def test_bench_catches_a_drain_one_step_too_long(tmp_path):
    """An R+G+1 drain leaves every word intact; the drain check (bit-true.md 9) must still fail it."""
    spec = _timing_set(tmp_path)
    core = CORE_SOURCES[0].read_text(encoding="ascii")
    wrong = core.replace("DRAIN_LOAD = HALF;", "DRAIN_LOAD = HALF + 1;")
    assert wrong != core
    (tmp_path / "core_long_drain.v").write_text(wrong, encoding="ascii")
    result = run_bench(spec, tmp_path, build_root=tmp_path / "b", core_sources=[tmp_path / "core_long_drain.v"])
    assert not result.passed and result.first_mismatch == "s_axis_tready still low after R+G drain cycles"


def _core_copy(tmp_path: Path, find: str, replace: str, name: str) -> Path:
    core = CORE_SOURCES[0].read_text(encoding="ascii")
    assert core.count(find) == 1
    path = tmp_path / name
    path.write_text(core.replace(find, replace), encoding="ascii")
    return path


def test_waiting_sink_catches_a_tvalid_that_waits_for_tready(tmp_path):
    """ARM IHI 0051A 2.2.1: a source must not wait for TREADY before asserting TVALID.

    Such a core still delivers every word to a sink that raises TREADY on its
    own, so only the sink that waits for TVALID can see the fault: nothing is
    ever offered, and the bench's watchdog ends the run.
    """
    spec = _timing_set(tmp_path)
    core = _core_copy(tmp_path, "assign m_axis_tvalid = out_valid;",
                      "assign m_axis_tvalid = out_valid & m_axis_tready;", "core_valid_waits.v")
    free = run_bench(spec, tmp_path, gap_percent=20, stall_percent=30, build_root=tmp_path / "b",
                     core_sources=[core])
    assert free.passed, free.first_mismatch
    for gaps, stalls in ((20, 30), (0, 0)):
        stuck = run_bench(spec, tmp_path, gap_percent=gaps, stall_percent=stalls, build_root=tmp_path / "b",
                          core_sources=[core], sink="waits-for-valid")
        assert not stuck.passed and stuck.n_mismatches == 1
        assert stuck.first_mismatch.startswith("deadlock: output never became valid while the sink waited for TVALID")
        assert f"0 of {count_hex_words(tmp_path / 'stimulus.hex')} words received" in stuck.first_mismatch
        assert stuck.n_words == 0
        assert "timeout" not in stuck.log
    assert run_bench(spec, tmp_path, gap_percent=20, stall_percent=30, build_root=tmp_path / "b",
                     sink="waits-for-valid").passed


# A probe spliced into a copy of the core: in every cycle with TREADY high, was a word seen waiting
# (TVALID high, TREADY low) in the cycle before? ARM IHI 0051A 2.2.1 lets a sink wait for exactly that.
_PROBE = """
    reg probe_seen_reg = 1'b0;
    always @(posedge clk) begin
        if (!rst && m_axis_tready === 1'b1 && !probe_seen_reg)
            $display("PROBE: m_axis_tready high with no word seen waiting in the cycle before");
        probe_seen_reg <= m_axis_tvalid === 1'b1 && m_axis_tready !== 1'b1;
    end

    assign m_axis_tlast  = out_word_reg[OUT_BITS-1];

endmodule
"""


@pytest.mark.parametrize("stalls", [0, 40])
def test_waiting_sink_raises_tready_only_for_a_word_it_has_seen(tmp_path, stalls):
    spec = _timing_set(tmp_path)
    core = _core_copy(tmp_path, "\n    assign m_axis_tlast  = out_word_reg[OUT_BITS-1];\n\nendmodule\n", _PROBE,
                      "core_probe.v")
    waiting = run_bench(spec, tmp_path, gap_percent=20, stall_percent=stalls, build_root=tmp_path / "b",
                        core_sources=[core], sink="waits-for-valid")
    assert waiting.passed, waiting.first_mismatch
    assert "PROBE:" not in waiting.log
    # The probe does see a sink that raises TREADY on its own.
    free = run_bench(spec, tmp_path, gap_percent=20, stall_percent=stalls, build_root=tmp_path / "b",
                     core_sources=[core])
    assert free.passed and "PROBE:" in free.log


def test_bench_options_are_checked(tmp_path):
    spec = _timing_set(tmp_path)
    for kwargs, field in ((dict(sink="lazy"), "sink"), (dict(max_reports=-1), "max_reports"),
                          (dict(watchdog_cycles=1.5), "watchdog_cycles")):
        with pytest.raises(SpecError) as err:
            run_bench(spec, tmp_path, build_root=tmp_path / "b", **kwargs)
        assert err.value.field == field


@pytest.mark.parametrize("generation", ["2005", "2012"])
@pytest.mark.parametrize("change, message", [
    (dict(KIND=4), "KIND must be 0 ca 1 go 2 so or 3 os"),
    (dict(KIND=3, OS_RANK=0), "OS RANK must be 1 to 2 times REF CELLS"),
    (dict(KIND=3, OS_RANK=33), "OS RANK must be 1 to 2 times REF CELLS"),
    (dict(EDGE=4), "EDGE must be 0 skip 1 zero pad 2 one sided or 3 circular"),
    (dict(EDGE=3, MAX_FRAME_LENGTH=36), "MAX FRAME LENGTH below the window length"),
    (dict(EDGE=3, MAX_FRAME_LENGTH=(1 << 24) + 1), "MAX FRAME LENGTH above 2 to the 24"),
    (dict(TRUNCATE_PARTIALS=1, ROUNDING=1), "TRUNCATE PARTIALS needs ROUNDING 0 floor"),
    (dict(SUM_BITS=19), "SUM BITS below bitlen"),
    (dict(PIPELINE_STAGES=0), "PIPELINE STAGES must be at least 1"),
])
def test_illegal_parameters_stop_elaboration(tmp_path, generation, change, message):
    spec = _spec("ca", 16, 2, alpha=17.28)
    params = {**core_parameters(spec), **change}
    with pytest.raises(BenchCompileError) as err:
        compile_bench(params, max_words=16, generation=generation, build_root=tmp_path)
    assert "illegal parameter combination for cfar_stream" in str(err.value)
    assert message in str(err.value)


def test_core_parameters_build_every_kind_and_edge_policy():
    """OS carries its rank k (docs/bit-true.md section 3); circular a frame store for the longest frame."""
    os_spec = spec_from_dict({"detector": {"kind": "os", "ref_cells_per_side": 8, "rank": 12, "alpha": 5.0}})
    p = core_parameters(os_spec)
    assert p["KIND"] == 3 and p["OS_RANK"] == 12 and p["EDGE"] == 0
    circ = spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 4, "alpha": 3.0, "edge": "circular"},
                           "stream": {"frame_length": 100}, "vectors": {"random_length_max": 300}})
    p = core_parameters(circ)
    assert p["EDGE"] == 3 and p["OS_RANK"] == 1
    # The vector set's longest frames: random frames up to random_length_max, a corner case of L + 1.
    assert p["MAX_FRAME_LENGTH"] == 300
    assert core_parameters(circ, max_frame_length=120)["MAX_FRAME_LENGTH"] == 120
    for bad in (8, (1 << 24) + 1, 99.5):  # below the window 2R+2G+1 = 9, above 2^24 (bit-true.md 1), not an int
        with pytest.raises(SpecError) as err:
            core_parameters(circ, max_frame_length=bad)
        assert err.value.field == "max_frame_length"
    with pytest.raises(SpecError) as err:
        core_parameters(_spec("ca", 4, 1, alpha=3.0), srst_level=2)
    assert err.value.field == "srst_level"


def test_core_parameters_carry_the_spec_values():
    """Integers only, taken from the spec's derived quantities (docs/bit-true.md sections 3-6)."""
    spec = _spec("go", 8, 1, alpha=6.0, edge="one-sided", compare=">=", stages=3, input_bits=12,
                 mean_by_shift=True, rounding="half-even", overflow="wrap", threshold_bits=14)
    p = core_parameters(spec)
    assert all(type(v) is int for v in p.values())
    assert p == {
        "INPUT_BITS": 12, "REF_CELLS": 8, "GUARD_CELLS": 1, "KIND": 1, "OS_RANK": 1, "EDGE": 2,
        "MAX_FRAME_LENGTH": 256,
        "SUM_BITS": (8 * 4095).bit_length(), "ALPHA_INT": spec.alpha_int, "DROP_BITS": spec.drop_bits,
        "THRESHOLD_FRAC_BITS": 0, "THRESHOLD_BITS": 14, "ROUNDING": 2, "OVERFLOW": 1, "COMPARE_GE": 1,
        "TRUNCATE_PARTIALS": 0, "PIPELINE_STAGES": 3, "SRST_LEVEL": 1,
    }
    # mean_by_shift: A = alpha * 2^(F_A + log2 R) / R = alpha * 2^F_A and d = F_A + 3 (section 4).
    assert p["ALPHA_INT"] == round(6.0 * 2 ** 12) and p["DROP_BITS"] == 12 + 3


def test_missing_simulator_is_a_spec_error(tmp_path, monkeypatch):
    monkeypatch.setenv("PATH", str(tmp_path))
    spec = _spec("ca", 4, 1, alpha=3.0)
    with pytest.raises(SpecError) as err:
        compile_bench(core_parameters(spec), build_root=tmp_path)
    assert err.value.field == "simulator"


def test_hex_word_count_follows_readmem_text_rules(tmp_path):
    # IEEE Std 1364-2005 17.2.9: white space and both comment styles separate words.
    p = tmp_path / "w.hex"
    p.write_text("// header\n0a 0b\n/* two\nlines */ 1_0\n\n\tff\n", encoding="ascii")
    assert count_hex_words(p) == 4
    p.write_text("@10 0a\n", encoding="ascii")
    assert count_hex_words(p) is None


@pytest.mark.slow
@pytest.mark.skipif(not LONG, reason="long co-simulation; set CFARVEC_LONG=1")
@pytest.mark.parametrize("seed", range(40))
def test_long_random_configurations(tmp_path, seed):
    rng = np.random.default_rng(1000 + seed)
    kind = str(rng.choice(["ca", "go", "so", "os"]))
    r, g = int(rng.integers(1, 33)), int(rng.integers(0, 5))
    rank = int(rng.integers(1, 2 * r + 1)) if kind == "os" else None
    trunc = bool(rng.random() < 0.25)
    fixed = dict(input_bits=int(rng.choice([1, 4, 8, 12, 16, 24])), alpha_frac_bits=int(rng.integers(6, 16)),
                 truncate_partials=trunc, alpha_csd_digits=int(rng.integers(0, 4)),
                 rounding="floor" if trunc else str(rng.choice(["floor", "half-up", "half-even"])),
                 overflow=str(rng.choice(["saturate", "wrap"])))
    div = {"ca": 2 * r, "go": r, "so": r}.get(kind, 3)
    fixed["mean_by_shift"] = bool(div & (div - 1) == 0 and rng.random() < 0.5)
    common = dict(alpha=float(rng.uniform(1.0, 30.0)),
                  edge=str(rng.choice(["skip", "zero-pad", "one-sided", "circular"])),
                  compare=str(rng.choice([">", ">="])), stages=int(rng.integers(1, 9)), rank=rank)
    probe = _spec(kind, r, g, threshold_bits=1, **common, **fixed)
    f_t = int(rng.integers(0, probe.product_frac_bits + 1))
    probe = _spec(kind, r, g, threshold_bits=1, threshold_frac_bits=f_t, **common, **fixed)
    full = scale_product(probe.statistic_max, probe.alpha_int, probe.drop_bits, probe.rounding, probe.truncate_partials)
    # The full-scale width or a little less (so overflow happens), within a 64-bit output word.
    narrow = max(1, min(int(full).bit_length() - int(rng.integers(0, 4)), 61 - probe.input_bits))
    spec = _spec(kind, r, g, threshold_bits=narrow, threshold_frac_bits=f_t, **common, **fixed)
    bench = dict(gap_percent=int(rng.integers(0, 50)), stall_percent=int(rng.integers(0, 50)),
                 seed=int(rng.integers(1, 1 << 30)), generation=str(rng.choice(["2005", "2012"])),
                 sink=str(rng.choice(["independent", "waits-for-valid"])))
    result, words, _ = _run_config(tmp_path, spec, bench, 20000, seed=seed)
    assert result.passed, f"{spec}\n{result.first_mismatch}"

"""The structural (cycle-stepped) model: its registers, timing, backpressure and hand-worked words.

Sources: this project's ``docs/bit-true.md`` (section 3 running sums,
section 8 word layout, section 9 streaming, drain, latency and
backpressure), which states common hardware practice (no outside source);
the valid/ready handshake is that of AMBA 4 AXI4-Stream (ARM IHI 0051A,
2010, section 2.2, from memory: a transfer takes place in a cycle where
both VALID and READY are high). The words of random specs are checked against the fast model
in ``test_pipeline_equivalence.py``, and through it against a literal reading
of the spec, worked examples and the float model in ``test_pipeline_fast.py``.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.pipeline_struct import StructuralPipeline, check_stream, run_structural, simulate
from refmodel.fixedpoint.word_format import pack_input
from test_pipeline_fast import HYP, LONG, specs, stream, streams

FEW = settings(HYP, max_examples=600 if LONG else 60)


# --------------------------------------------------------------------------
# Registers
# --------------------------------------------------------------------------


@FEW
@given(data=st.data())
def test_running_sum_registers_hold_the_side_sums(data):
    """Section 3: the modular running sums equal the true side sums, also at the minimal sum width."""
    spec = data.draw(specs())
    samples, last = data.draw(streams(spec))
    pipe = StructuralPipeline(spec)
    R, G, H = spec.ref_per_side, spec.guard_per_side, spec.half_window
    words = iter(int(w) for w in pack_input(spec, samples, last))
    pending = next(words)
    for _ in range(3 * len(samples) + 4 * spec.window_length):
        took, _word = pipe.clock(pending is not None, pending or 0, True)
        if took:
            pending = next(words, None)
        cells = [c[0] for c in pipe.window]
        assert pipe.sum_lead == sum(cells[:R])
        assert pipe.sum_lag == sum(cells[H + G + 1 :])


# --------------------------------------------------------------------------
# Timing (section 9)
# --------------------------------------------------------------------------


def _spec(**over):
    det = {"kind": "ca", "ref_cells_per_side": 3, "guard_cells_per_side": 1, "alpha": 3.0, "edge": "zero-pad"}
    fixed = {"input_bits": 8}
    timing = {"pipeline_stages": 2, "frame_length": 16}
    for key, value in over.items():
        section = det if key in det or key in ("rank", "compare") else timing if key in timing else fixed
        section[key] = value
    return spec_from_dict({"detector": det, "fixed": fixed, "stream": timing})


def _frames(*lengths, seed=0):
    rng = np.random.default_rng(seed)
    x = rng.integers(0, 256, size=sum(lengths))
    last = np.zeros(sum(lengths), dtype=bool)
    last[np.cumsum(lengths) - 1] = True
    return x, last


@pytest.mark.parametrize("stages", [1, 2, 5])
@pytest.mark.parametrize("edge", ["skip", "zero-pad", "one-sided"])
def test_latency_and_drain_at_full_rate(stages, edge):
    spec = _spec(pipeline_stages=stages, edge=edge)
    H = spec.half_window
    lengths = (16, 9, 20)
    run = simulate(spec, *_frames(*lengths))
    # Input-to-output latency H + pipeline_stages for every sample (latency_cycles).
    assert spec.latency_cycles == H + stages
    assert np.all(run.emit_cycle - run.accept_cycle == spec.latency_cycles)
    # A frame of L samples occupies L + H input cycles (the drain).
    frame_starts = run.accept_cycle[np.concatenate([[0], np.cumsum(lengths)[:-1]])]
    assert list(np.diff(frame_starts)) == [lengths[0] + H, lengths[1] + H]
    assert run.cycles == sum(lengths) + 2 * H + H + stages  # two drains between, the last drain, the stages


@pytest.mark.parametrize("stages", [1, 3])
def test_circular_replay_timing(stages):
    spec = _spec(pipeline_stages=stages, edge="circular")
    H, L = spec.half_window, spec.frame_length
    run = simulate(spec, *_frames(L, L))
    # First word leaves L + 2H + stages cycles after the frame's first sample entered (latency_cycles).
    assert spec.latency_cycles == L + 2 * H + stages
    assert run.emit_cycle[0] - run.accept_cycle[0] == spec.latency_cycles
    assert np.all(np.diff(run.emit_cycle[:L]) == 1)
    # Input is refused for the L + 2H replay cycles.
    assert run.accept_cycle[L] - run.accept_cycle[L - 1] == L + 2 * H + 1


@FEW
@given(data=st.data())
def test_stalls_change_timing_only(data):
    """Section 9, backpressure: with random source gaps and sink stalls the words are the same, none lost or repeated."""
    spec = replace(data.draw(specs()), pipeline_stages=data.draw(st.integers(1, 4)))
    samples, last = data.draw(streams(spec, max_frames=2))
    n_cycles = 4 * len(samples) + 40
    in_valid = data.draw(st.lists(st.booleans(), min_size=n_cycles, max_size=n_cycles))
    out_ready = data.draw(st.lists(st.booleans(), min_size=n_cycles, max_size=n_cycles))
    full = simulate(spec, samples, last)
    stalled = simulate(spec, samples, last, in_valid=in_valid, out_ready=out_ready)
    assert np.array_equal(stalled.words, full.words)
    ready = np.asarray(out_ready + [True] * stalled.cycles)
    valid = np.asarray(in_valid + [True] * stalled.cycles)
    assert np.all(ready[stalled.emit_cycle - 1]), "a word was handed over while the sink was not ready"
    assert np.all(valid[stalled.accept_cycle - 1]), "a sample was taken while the source offered none"
    assert np.all(np.diff(stalled.emit_cycle) > 0) and np.all(np.diff(stalled.accept_cycle) > 0)


def test_sink_stall_holds_every_register():
    spec = _spec(edge="one-sided")
    pipe = StructuralPipeline(spec)
    words = [int(w) for w in pack_input(spec, *_frames(16))]
    for w in words[:10]:
        pipe.clock(True, w, True)
    before = (list(pipe.window), pipe.sum_lag, pipe.sum_lead, list(pipe.stages), pipe.drain_left)
    assert pipe.clock(True, words[10], False) == (False, None)
    assert (list(pipe.window), pipe.sum_lag, pipe.sum_lead, list(pipe.stages), pipe.drain_left) == before


# --------------------------------------------------------------------------
# Directed cases
# --------------------------------------------------------------------------


def test_hand_computed_words():
    """CA, R=2, G=1, alpha=2, A = 2 * 2**12 / 4 = 2048, so T = round_half_up(S / 2); worked by hand."""
    x = np.array([1, 2, 3, 4, 50, 6, 7, 8])
    last = np.zeros(8, dtype=bool)
    last[-1] = True
    expect = {
        # n=0: lag outside, lead x2+x3 = 7; n=4: lag 2+3, lead 7+8 = 20; n=7 circular: lag 50+6, lead x1+x2 = 61
        "zero-pad": [4, 27, 29, 8, 10, 8, 27, 28],
        "one-sided": [7, 54, 56, 8, 10, 7, 54, 56],
        "circular": [10, 35, 33, 8, 10, 8, 29, 31],
        "skip": [0, 0, 0, 8, 10, 0, 0, 0],
    }
    for edge, t in expect.items():
        spec = spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 2, "guard_cells_per_side": 1,
                                            "alpha": 2.0, "edge": edge}, "fixed": {"input_bits": 8}})
        assert spec.alpha_int == 2048
        out = run_structural(spec, x, last)
        assert out.threshold.tolist() == t, edge
        assert out.det.tolist() == [False] * 4 + [True] + [False] * 3
        assert out.valid.tolist() == [False] * 3 + [True, True] + [False] * 3
        assert out.last.tolist() == last.tolist()


def test_minimal_input_width_and_compare_at_equality():
    """1-bit input, alpha = 1: the threshold equals the CUT, so only ">=" detects."""
    base = {"kind": "ca", "ref_cells_per_side": 1, "guard_cells_per_side": 0, "alpha": 1.0, "edge": "zero-pad"}
    x = np.array([1, 1, 1, 1])
    last = np.array([False, False, False, True])
    for compare, det in ((">", False), (">=", True)):
        spec = spec_from_dict({"detector": {**base, "compare": compare}, "fixed": {"input_bits": 1, "alpha_frac_bits": 4}})
        out = run_structural(spec, x, last)
        assert out.threshold[1:3].tolist() == [1, 1]
        assert out.det[1:3].tolist() == [det, det]


def test_words_wider_than_64_bits_are_refused():
    """32-bit input and a 43-bit threshold would make a 78-bit word: refused, naming the field."""
    with pytest.raises(SpecError, match="fixed.threshold_bits"):
        spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 4, "alpha": 5.0, "edge": "zero-pad"},
                        "fixed": {"input_bits": 32, "alpha_frac_bits": 20, "threshold_frac_bits": 8}})


def test_output_words_use_the_documented_bit_positions():
    """Section 8, LSB first: CUT [W_in-1:0], T [W_in+W_T-1:W_in], det at W_in+W_T, v at W_in+W_T+1,
    last at W_in+W_T+2; the words of test_hand_computed_words built by hand from those positions.

    Spec: CA, R = 2, G = 1, W_in = 8, alpha = 2, F_A = 12, zero-pad: A = 2048, d = 12, and the default
    W_T = bitlen(T0 at S_max = 4 * 255 = 1020) = bitlen((1020 * 2048 + 2048) >> 12) = bitlen(510) = 9.
    So T sits at bits 8..16, det at 17, v at 18, last at 19: a 20-bit word.
    """
    spec = spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 2, "guard_cells_per_side": 1,
                                        "alpha": 2.0, "edge": "zero-pad"}, "fixed": {"input_bits": 8}})
    x = [1, 2, 3, 4, 50, 6, 7, 8]
    t = [4, 27, 29, 8, 10, 8, 27, 28]  # test_hand_computed_words, zero-pad
    det = [0, 0, 0, 0, 1, 0, 0, 0]
    v = [0, 0, 0, 1, 1, 0, 0, 0]
    last = [0] * 7 + [1]
    want = [x[n] | t[n] << 8 | det[n] << 17 | v[n] << 18 | last[n] << 19 for n in range(8)]
    # e.g. n = 4: 50 + 10 * 2^8 + 2^17 + 2^18 = 50 + 2560 + 131072 + 262144 = 395826
    assert want[4] == 395826
    run = simulate(spec, np.array(x), np.array(last, dtype=bool))
    assert run.words.tolist() == want
    assert spec.output_bits == 20


def test_output_words_of_a_random_frame_pack_the_fields_at_the_documented_positions():
    """The same layout on a 16-sample random frame: W_in = 8 and, for CA R = 3, alpha = 3, F_A = 12,
    A = 3 * 4096 / 6 = 2048, d = 12, S_max = 6 * 255 = 1530, T0 max = (1530 * 2048 + 2048) >> 12 = 765,
    W_T = bitlen(765) = 10; so T at bits 8..17, det 18, v 19, last 20. The fields come from the
    structural model (checked against hand values and the plain reading elsewhere)."""
    spec = _spec()
    x, last = _frames(16)
    run = simulate(spec, x, last)
    out = run_structural(spec, x, last)
    want = [int(c) | int(t) << 8 | int(d) << 18 | int(v) << 19 | int(e) << 20
            for c, t, d, v, e in zip(out.cut, out.threshold, out.det, out.valid, out.last)]
    assert run.words.tolist() == want
    assert spec.output_bits == 21 and int(out.threshold.max()) < 1 << 10


# --------------------------------------------------------------------------
# Bad streams
# --------------------------------------------------------------------------


@pytest.mark.parametrize(
    "samples, last, field",
    [
        ([1] * 9, [False] * 9, "last"),  # no final marker
        ([1] * 8, [False] * 7 + [True], "frame length"),  # shorter than W = 9
        ([1] * 8 + [256], [False] * 8 + [True], "samples"),  # beyond 8 bits
        ([1] * 8 + [-1], [False] * 8 + [True], "samples"),
        ([1.0] * 9, [False] * 8 + [True], "samples"),
        ([1] * 9, [True] * 3, "last"),
    ],
)
def test_bad_stream_names_the_field(samples, last, field):
    with pytest.raises(SpecError) as info:
        check_stream(_spec(), np.array(samples), np.array(last))
    assert info.value.field == field


def test_circular_frame_limit():
    """Section 1: under circular a frame holds at most 2**24 samples (checked before any clock runs)."""
    n = (1 << 24) + 1
    last = np.zeros(n, dtype=bool)
    last[-1] = True
    with pytest.raises(SpecError) as info:
        check_stream(_spec(edge="circular"), np.zeros(n, dtype=np.int64), last)
    assert info.value.field == "frame length"

"""Fast (vectorised, chunked) model == structural (cycle-stepped) model, word for word.

Source: both implement this project's ``docs/bit-true.md``; the fast model is
checked against worked examples, a literal reading of that text and the float
model in ``test_pipeline_fast.py``, and the structural model's own timing and
registers in ``test_pipeline_struct.py``. Equality of two implementations of
one written spec is common practice (no outside source).

The random specs and streams are those of ``test_pipeline_fast.py``: every
detector kind, edge policy, rounding and overflow mode, CSD and truncated
constants, power-of-two and other divisors, threshold words narrow enough to
saturate or wrap, frames from the window length up.
"""

from __future__ import annotations

import numpy as np
import pytest

from refmodel.errors import SpecError
from hypothesis import given, settings
from hypothesis import strategies as st

from refmodel.block_spec import spec_from_dict
from refmodel.fixedpoint.pipeline_fast import FastPipeline, run_fast
from refmodel.fixedpoint.pipeline_struct import run_structural, simulate
from refmodel.fixedpoint.word_format import PipelineOutput, pack_output, unpack_output
from test_pipeline_fast import HYP, LONG, assert_words, specs, stream, streams

# A few hundred examples in CI (make test), many more with CFARVEC_LONG=1 (make test-long).
EQUIV = settings(HYP, max_examples=5000 if LONG else 300)


def fast_output(spec, samples, last, chunk: int | None = None) -> PipelineOutput:
    """The fast model's words for a whole stream, in one call or fed ``chunk`` samples at a time."""
    if chunk is None:
        return run_fast(spec, samples, last)
    pipe = FastPipeline(spec)
    parts = [pipe.push(samples[i : i + chunk], last[i : i + chunk]) for i in range(0, len(samples), chunk)]
    return PipelineOutput.concat(parts + [pipe.finish()])


def assert_same_words(spec, samples, last, chunk=None):
    words = simulate(spec, samples, last).words
    got = fast_output(spec, samples, last, chunk)
    assert_words(got, unpack_output(spec, words))
    # Every field in range: packed, the fast model's fields give the structural model's words.
    assert np.array_equal(pack_output(spec, got), words)


@EQUIV
@given(data=st.data())
def test_fast_equals_structural(data):
    spec = data.draw(specs())
    samples, last = data.draw(streams(spec))
    assert_same_words(spec, samples, last)


@settings(HYP, max_examples=1500 if LONG else 100)
@given(data=st.data())
def test_fast_in_chunks_equals_structural(data):
    """Chunk boundaries anywhere (inside a frame, on a frame end, one sample long)."""
    spec = data.draw(specs())
    samples, last = data.draw(streams(spec))
    assert_same_words(spec, samples, last, chunk=data.draw(st.integers(1, len(samples))))


# Directed cases, every kind and edge policy: corners random draws reach rarely.

KINDS_EDGES = [(k, e) for k in ("ca", "go", "so", "os") for e in ("skip", "zero-pad", "one-sided", "circular")]


def _directed_spec(kind, edge, **fixed):
    det = {"kind": kind, "ref_cells_per_side": 4, "guard_cells_per_side": 2, "alpha": 4.5, "edge": edge}
    if kind == "os":
        det["rank"] = 6
    return spec_from_dict({"detector": det, "fixed": {"input_bits": 12, **fixed}, "stream": {"frame_length": 13}})


@pytest.mark.parametrize("kind, edge", KINDS_EDGES)
def test_extremes_and_window_length_frames(kind, edge):
    """All-zero, full-scale, spike and L = W frames, back to back."""
    spec = _directed_spec(kind, edge)
    W, top = spec.window_length, (1 << spec.input_bits) - 1
    spike = np.zeros(40, dtype=np.int64)
    spike[[0, 7, 39]] = top
    ramp = np.arange(W) * (top // W)
    x, last = stream(np.zeros(W), np.full(W, top), spike, ramp, np.full(25, top), np.zeros(20))
    assert_same_words(spec, x, last)


@pytest.mark.parametrize("kind, edge", KINDS_EDGES)
@pytest.mark.parametrize("overflow", ["saturate", "wrap"])
def test_narrow_threshold(kind, edge, overflow):
    """A threshold word far too narrow for full scale: saturation and wrap both act."""
    spec = _directed_spec(kind, edge, threshold_bits=6, overflow=overflow)
    rng = np.random.default_rng(7)
    x, last = stream(rng.integers(0, 1 << 12, 30), np.full(spec.window_length, (1 << 12) - 1), rng.integers(0, 64, 17))
    assert_same_words(spec, x, last, chunk=5)


@pytest.mark.parametrize("rounding", ["floor", "half-up", "half-even"])
def test_rounding_ties(rounding):
    """Products exactly on a half, where half-up and half-even part ways."""
    spec = spec_from_dict({
        "detector": {"kind": "ca", "ref_cells_per_side": 2, "guard_cells_per_side": 0, "alpha": 1.0, "edge": "zero-pad"},
        "fixed": {"input_bits": 4, "alpha_frac_bits": 4, "rounding": rounding},
    })
    # A = 1 * 2**4 / 4 = 4 with 4 fraction bits: T = S / 4 rounded, so S = 2, 6, 10 are ties.
    x, last = stream([1, 1, 0, 0, 1, 1, 3, 3, 0, 0, 5, 5, 0, 0, 1, 1, 2, 2])
    assert_same_words(spec, x, last)


def test_many_frames_in_small_chunks():
    """Forty frames of varying length through chunks shorter than most frames."""
    spec = _directed_spec("ca", "one-sided", alpha_csd_digits=3)
    rng = np.random.default_rng(11)
    lengths = rng.integers(spec.window_length, 60, size=40)
    x, last = stream(*(rng.exponential(300.0, n).astype(np.int64).clip(0, 4095) for n in lengths))
    assert_same_words(spec, x, last, chunk=37)


def test_words_wider_than_64_bits_are_refused():
    """32-bit input and a 43-bit threshold would make a 78-bit word: refused, naming the field."""
    with pytest.raises(SpecError, match="fixed.threshold_bits"):
        spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 4, "alpha": 5.0, "edge": "zero-pad"},
                        "fixed": {"input_bits": 32, "alpha_frac_bits": 20, "threshold_frac_bits": 8}})


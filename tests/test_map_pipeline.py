"""The map (range-Doppler) bit-accurate models: structural == fast, and both against the float 2D model.

- Equivalence: refmodel.fixedpoint.map_struct (line buffers, column sums, running rectangle sums,
  one window-stream step at a time) and refmodel.fixedpoint.map_fast (summed-area tables) give the
  same words over random map specs and maps, edges, saturation and ties included (hypothesis).
- Against the float model refmodel.floatmodel.float_cfar2d.cfar_2d at the realised alpha: the
  threshold is within the documented quantisation bound (docs/bit-true.md section 5 and
  BlockSpec.threshold_error_bound of the arithmetic twin, docs/bit-true-2d.md section 6), and the
  detections agree wherever the CUT is farther than that bound from the float threshold.
"""

from __future__ import annotations

import os

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.map_fast import MapPipeline, run_map_fast
from refmodel.fixedpoint.map_struct import run_map_structural
from refmodel.floatmodel.float_cfar2d import cfar_2d

LONG = os.environ.get("CFARVEC_LONG") == "1"
# Common practice, no source: modest example counts in CI, more with CFARVEC_LONG=1.
HYP = settings(max_examples=400 if LONG else 40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def map_specs(draw, small_threshold=True):
    kind = draw(st.sampled_from(["ca", "go", "so", "os"]))
    window = draw(st.sampled_from(["ring", "cross"]))
    rd, rr = draw(st.integers(0, 2)), draw(st.integers(0, 2))
    gd, gr = draw(st.integers(0, 2)), draw(st.integers(0, 2))
    assume(rd + rr >= 1)
    if kind in ("go", "so"):
        assume(rr >= 1 or (window == "ring" and gr >= 1 and rd >= 1))
    wd, wr = 2 * (rd + gd) + 1, 2 * (rr + gr) + 1
    n = wd * wr - (2 * gd + 1) * (2 * gr + 1) if window == "ring" else 2 * (rd + rr)
    det = {"kind": kind, "alpha": draw(st.floats(0.25, 40.0)), "compare": draw(st.sampled_from([">", ">="]))}
    if kind == "os":
        det["rank"] = draw(st.integers(1, n))
    trunc = draw(st.booleans())
    fixed = {
        "input_bits": draw(st.integers(1, 12)),
        "alpha_frac_bits": draw(st.integers(0, 12)),
        "alpha_csd_digits": draw(st.integers(0, 3)),
        "truncate_partials": trunc,
        "rounding": "floor" if trunc else draw(st.sampled_from(["floor", "half-up", "half-even"])),
        "overflow": draw(st.sampled_from(["saturate", "wrap"])),
        "mean_by_shift": draw(st.booleans()),
    }
    fixed["threshold_frac_bits"] = draw(st.integers(0, 2))
    if small_threshold and draw(st.booleans()):
        fixed["threshold_bits"] = draw(st.integers(1, fixed["input_bits"] + 2))
    mp = {"range_cells": draw(st.integers(wr, wr + 4)), "doppler_bins": draw(st.integers(wd, wd + 4)),
          "order": draw(st.sampled_from(["range-fast", "doppler-fast"])), "window": window,
          "ref_range": rr, "ref_doppler": rd, "guard_range": gr, "guard_doppler": gd,
          "range_edge": draw(st.sampled_from(["skip", "zero-pad", "circular"])),
          "doppler_edge": draw(st.sampled_from(["skip", "zero-pad", "circular"]))}
    try:
        spec = spec_from_dict({"detector": det, "fixed": fixed, "map": mp,
                               "stream": {"pipeline_stages": draw(st.integers(1, 3))}})
    except SpecError:
        assume(False)
    return spec


@st.composite
def map_streams(draw, spec):
    maps = draw(st.integers(1, 3))
    top = (1 << spec.input_bits) - 1
    style = draw(st.sampled_from(["uniform", "small", "full", "constant", "hot"]))
    n = maps * spec.map_cells
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    if style == "uniform":
        x = rng.integers(0, top + 1, n)
    elif style == "small":
        x = rng.integers(0, min(top, 3) + 1, n)
    elif style == "full":  # saturation: full scale with a few zeros
        x = np.where(rng.random(n) < 0.9, top, 0)
    elif style == "constant":  # ties: every threshold is alpha_r times the same level
        x = np.full(n, draw(st.integers(0, top)))
    else:  # a single hot cell per map, anywhere (edges and corners included)
        x = np.zeros(n, dtype=np.int64)
        x[np.arange(maps) * spec.map_cells + rng.integers(0, spec.map_cells, maps)] = top
    last = np.zeros(n, dtype=bool)
    last[spec.map_cells - 1 :: spec.map_cells] = True
    return x.astype(np.int64), last


@HYP
@given(st.data())
def test_structural_equals_fast(data):
    spec = data.draw(map_specs())
    x, last = data.draw(map_streams(spec))
    fast = run_map_fast(spec, x, last)
    struct = run_map_structural(spec, x, last)
    assert len(fast) == x.size
    for f in ("cut", "threshold", "det", "valid", "last"):
        np.testing.assert_array_equal(getattr(fast, f), getattr(struct, f), err_msg=f)


@HYP
@given(st.data())
def test_fast_words_do_not_depend_on_chunks(data):
    spec = data.draw(map_specs())
    x, last = data.draw(map_streams(spec))
    whole = run_map_fast(spec, x, last)
    cuts = sorted(data.draw(st.lists(st.integers(0, x.size), max_size=5)))
    pipe, parts, a = MapPipeline(spec), [], 0
    for b in cuts + [x.size]:
        parts.append(pipe.push(x[a:b], last[a:b]))
        a = b
    parts.append(pipe.finish())
    from refmodel.fixedpoint.word_format import PipelineOutput

    assert PipelineOutput.concat(parts).equals(whole)


def _float_of(spec, x):
    w = spec.window
    rd = spec.rd_map(x.reshape(-1, spec.map_cells)).astype(float)
    return cfar_2d(rd, spec.kind, (w.ref_doppler, w.ref_range), (w.guard_doppler, w.guard_range),
                   spec.realised_alpha, rank=spec.rank, compare=spec.compare, range_edge=spec.range_edge,
                   doppler_edge=spec.doppler_edge, window=w.shape)


@HYP
@given(st.data())
def test_fast_against_float_model_within_the_quantisation_bound(data):
    spec = data.draw(map_specs(small_threshold=False))
    assume(spec.overflow == "saturate")
    x, last = data.draw(map_streams(spec))
    out = run_map_fast(spec, x, last)
    ref = _float_of(spec, x)
    shape = ref.threshold.shape
    thr = spec.rd_map(out.threshold.reshape(-1, spec.map_cells)).reshape(shape)
    det = spec.rd_map(out.det.reshape(-1, spec.map_cells)).reshape(shape)
    valid = spec.rd_map(out.valid.reshape(-1, spec.map_cells)).reshape(shape)
    np.testing.assert_array_equal(valid, ref.valid)
    skipped = np.isnan(ref.threshold)
    assert not det[skipped].any() and not thr[skipped].any()
    lsb = 2.0 ** spec.threshold_frac_bits
    est = ref.estimate[~skipped]
    s = est * spec.mean_divisor  # the integer statistic the float estimate divides
    bound = spec.threshold_error_bound(s)
    fixed_t = thr[~skipped] / lsb
    np.testing.assert_array_less(np.abs(fixed_t - ref.threshold[~skipped]), bound + 1e-12)
    cut = spec.rd_map(x.reshape(-1, spec.map_cells)).reshape(shape)[~skipped]
    clear = np.abs(cut - ref.threshold[~skipped]) > bound
    np.testing.assert_array_equal(det[~skipped][clear], ref.detections[~skipped][clear])


def _spec(**over):
    d = {"detector": {"kind": "ca", "alpha": 4.0}, "fixed": {"input_bits": 8, "alpha_frac_bits": 10},
         "map": {"range_cells": 12, "doppler_bins": 9, "ref_range": 2, "ref_doppler": 1, "guard_range": 1,
                 "guard_doppler": 1, "range_edge": "zero-pad", "doppler_edge": "circular"}}
    for k, v in over.items():
        sec, key = k.split("__")
        d[sec][key] = v
    return spec_from_dict(d)


def _stream(spec, maps):
    x = np.concatenate([spec.stream_cells(m) for m in maps]).astype(np.int64)
    last = np.zeros(x.size, dtype=bool)
    last[spec.map_cells - 1 :: spec.map_cells] = True
    return x, last


def test_constant_map_tie_follows_compare():
    # OS with alpha = 1: A = 2^F_A exactly (divisor 1), so on a constant map v every rank gives
    # S = v and T = v wherever the window holds map cells only; ">" then gives no detection and
    # ">=" a detection (docs/bit-true-2d.md section 7, docs/bit-true.md section 7).
    for cmp, want in ((">", False), (">=", True)):
        spec = _spec(detector__alpha=1.0, detector__compare=cmp, detector__kind="os", detector__rank=5,
                     map__range_edge="skip")
        assert spec.realised_alpha == 1.0
        rd = np.full((9, 12), 37)
        out = run_map_fast(spec, *_stream(spec, [rd]))
        inner = out.valid
        assert inner.any()
        assert np.all(out.threshold[inner] == 37)
        assert np.all(out.det[inner] == want)


def test_saturating_threshold_is_all_ones():
    # Full-scale map, threshold word of 4 bits: T = 2^4 - 1 everywhere it is computed (section 6).
    spec = _spec(fixed__threshold_bits=4)
    rd = np.full((9, 12), 255)
    out = run_map_fast(spec, *_stream(spec, [rd]))
    assert np.all(out.threshold == 15) and np.all(out.det)


def test_wrap_in_doppler_sees_the_other_end():
    # Circular Doppler (the default): a hot cell in Doppler bin 0 is a reference cell of the CUT in
    # Doppler bin 7 at the same range (offset +2 = Gd + Rd wraps 9 to bin 0); under zero-pad it is not.
    rd = np.zeros((9, 12), dtype=np.int64)
    rd[0, 5] = 200
    for edge, seen in (("circular", True), ("zero-pad", False)):
        spec = _spec(map__doppler_edge=edge)
        out = run_map_fast(spec, *_stream(spec, [rd]))
        thr = spec.rd_map(out.threshold)
        assert (thr[7, 5] > 0) == seen
        assert thr[2, 5] > 0  # the ordinary neighbour, offset -2


def test_bad_streams_are_refused():
    spec = _spec()
    x, last = _stream(spec, [np.zeros((9, 12))])
    with pytest.raises(SpecError) as exc:
        run_map_fast(spec, x[:-1], last[1:])
    assert exc.value.field == "frame length"
    with pytest.raises(SpecError) as exc:
        run_map_fast(spec, x + 256, last)
    assert exc.value.field == "samples"
    with pytest.raises(SpecError) as exc:
        run_map_fast(spec, x[:50], np.zeros(50, bool))
    assert exc.value.field == "last"

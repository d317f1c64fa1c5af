"""Every directed corner case is in the default vector set.

The expected frames are built here from the case definitions written in
``docs/vectors.md`` (section "Directed corner cases"), then searched for among
the frames of ``stimulus.hex`` (read with the independent IEEE Std 1364-2005
17.2.9 reader). The spec is an invented scenario: a made-up coastal-cliff
radar range line with guard cells, so both the guard and the reference
second-target cases exist.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_vectors_readmem import read_memory_text

from refmodel.block_spec import spec_from_dict
from vectors.vector_set import write_vector_set

R, G, BITS, L = 3, 2, 8, 40
H, W = R + G, 2 * (R + G) + 1
F = (1 << BITS) - 1
B = max(1, F >> 5)


def pattern(n: int) -> list[int]:
    """docs/vectors.md: P(i) = ((i * 2654435761 + 12345) mod 2^32) >> (32 - input_bits)."""
    return [((i * 2654435761 + 12345) % 2**32) >> (32 - BITS) for i in range(n)]


@pytest.fixture(scope="module")
def frames(tmp_path_factory):
    spec = spec_from_dict({
        "detector": {"kind": "go", "ref_cells_per_side": R, "guard_cells_per_side": G, "alpha": 3.0},
        "fixed": {"input_bits": BITS},
        "stream": {"frame_length": L},
        "vectors": {"scenario_frames": 2, "random_frames": 2},
    })
    out = tmp_path_factory.mktemp("corner") / "set"
    write_vector_set(spec, out)
    words = read_memory_text((out / "stimulus.hex").read_text(), 16)
    result, cur = [], []
    for w in words:  # docs/bit-true.md section 1: sample in bits [W_in-1:0], last marker in bit W_in
        cur.append(w & F)
        if w >> BITS:
            result.append(tuple(cur))
            cur = []
    assert cur == []  # the stream ends on a last marker
    return result


def test_every_frame_is_at_least_one_window_long(frames):
    assert min(len(f) for f in frames) == W


def _with(n, base, cells):
    f = [base] * n
    for i, v in cells.items():
        f[i] = v
    return tuple(f)


def expected_cases():
    cases = {
        "all_zero": [(0,) * L],
        "all_full_scale": [(F,) * L],
        "all_one_lsb": [(1,) * L],
        "impulse_from_start": [_with(2 * W, 0, {k: F}) for k in range(W)],
        "impulse_from_end": [_with(2 * W, 0, {2 * W - 1 - k: F}) for k in range(W)],
        "second_target_in_guard_cells": [_with(2 * W + 1, B, {W: F, W + s * d: F >> 1})
                                         for d in range(1, G + 1) for s in (-1, 1)],
        "second_target_in_reference_cells": [_with(2 * W + 1, B, {W: F, W + s * d: F >> 1})
                                             for d in range(G + 1, H + 1) for s in (-1, 1)],
        "step_up": [(0,) * W + (F,) * (W + 1), (B,) * W + (F >> 1,) * (W + 1)],
        "step_down": [(F,) * W + (0,) * (W + 1), (F >> 1,) * W + (B,) * (W + 1)],
        "alternating": [tuple(F if i % 2 else 0 for i in range(2 * W + 1)),
                        tuple(0 if i % 2 else F for i in range(2 * W + 1))],
        "frame_equals_window": [tuple(i * F // (W - 1) for i in range(W)), _with(W, B, {H: F}), tuple(pattern(W))],
        "odd_lengths": [tuple(pattern(n)) for n in (W, W + 2, W + 4, W + 6, 2 * W + 1, 2 * W + 3, L + 1)],
    }
    return cases


@pytest.mark.parametrize("label", list(expected_cases()))
def test_directed_case_is_present(frames, label):
    present = set(frames)
    missing = [f for f in expected_cases()[label] if f not in present]
    assert not missing, f"{label}: {len(missing)} frame(s) missing"


def test_impulses_cover_every_position_relative_to_start_and_end(frames):
    impulses = {f.index(F) for f in frames if len(f) == 2 * W and sorted(set(f)) == [0, F] and f.count(F) == 1}
    assert impulses == set(range(2 * W))  # offsets 0..W-1 from the start and from the end


def test_many_back_to_back_minimal_frames(frames):
    step = max(1, F >> 6)
    want = [_with(W, min(F, (j % 16 + 1) * step), {j % W: F}) for j in range(64)]
    for start in range(len(frames) - 63):
        if frames[start : start + 64] == want:
            return
    pytest.fail("the 64 back-to-back window-length frames are not in the stimulus")


def test_no_guard_case_without_guard_cells(tmp_path):
    spec = spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": 2, "alpha": 3.0},
                           "fixed": {"input_bits": 6}, "stream": {"frame_length": 16},
                           "vectors": {"scenario_frames": 0, "random_frames": 0}})
    m = write_vector_set(spec, tmp_path / "set")
    labels = [c["label"] for c in m["corner_cases"]]
    assert "second_target_in_guard_cells" not in labels and "second_target_in_reference_cells" in labels
    assert np.sum([c["frames"] for c in m["corner_cases"]]) == m["totals"]["frames"]

"""An independent transcription of docs/bit-true-2d.md (with docs/bit-true.md sections 4-8), cell by cell.

Written from the two documents alone, with plain Python integers: the reference cells of each CUT
by their offsets (no line buffers, no running sums, no summed-area table), the edge rules per axis,
the constant A = floor(alpha * 2^F_A / D + 1/2), the product and rounding table, saturation or wrap,
the compare, the valid and skip rules, the output order. The fast model must give the same words.
(Plain-binary constants only, alpha_csd_digits = 0, without truncated partials: the NAF rules are
checked for 1D in tests/test_fixed_arith_oracle.py.)
"""

from __future__ import annotations

import math
import zlib

import numpy as np
import pytest

from refmodel.block_spec import spec_from_dict
from refmodel.fixedpoint.map_fast import run_map_fast


def doc_words(cfg: dict, rd_map: list[list[int]]) -> list[tuple[int, int, bool, bool, bool]]:
    """Words (cut, T, det, v, last) of one map, in stream order, from the documents."""
    det_c, fx, mp = cfg["detector"], cfg["fixed"], cfg["map"]
    Ld, Lr = mp["doppler_bins"], mp["range_cells"]
    Rr, Rd, Gr, Gd = mp["ref_range"], mp["ref_doppler"], mp["guard_range"], mp["guard_doppler"]
    Hr, Hd = Rr + Gr, Rd + Gd
    w_in, f_a, f_t = fx["input_bits"], fx["alpha_frac_bits"], fx["threshold_frac_bits"]
    kind = det_c["kind"]
    full = 2**w_in - 1
    # Section 2: the reference cells and the halves.
    offs = []
    for d in range(-Hd, Hd + 1):
        for r in range(-Hr, Hr + 1):
            if abs(d) <= Gd and abs(r) <= Gr:
                continue
            if mp["window"] == "cross" and d != 0 and r != 0:
                continue
            offs.append((d, r))
    n = len(offs)
    n_half = sum(1 for _, r in offs if r < 0)
    # docs/bit-true-2d.md section 5 (divisor D) and docs/bit-true.md section 4 (A).
    D = {"ca": n, "go": n_half, "so": n_half, "os": 1}[kind]
    A = math.floor(det_c["alpha"] * 2**f_a / D + 0.5)
    d_bits = f_a - f_t
    # Section 6: default threshold width from the largest statistic.
    s_max = {"ca": n * full, "go": n_half * full, "so": n_half * full, "os": full}[kind]

    def rnd(p):
        if d_bits == 0:
            return p
        q = (p + 2 ** (d_bits - 1)) >> d_bits
        if fx["rounding"] == "floor":
            return p >> d_bits
        if fx["rounding"] == "half-even" and p & (2**d_bits - 1) == 2 ** (d_bits - 1) and q % 2 == 1:
            return q - 1
        return q

    w_t = fx.get("threshold_bits") or max(1, rnd(s_max * A).bit_length())

    def cell(d, r):
        if not 0 <= d < Ld:
            if mp["doppler_edge"] != "circular":
                return 0
            d %= Ld
        if not 0 <= r < Lr:
            if mp["range_edge"] != "circular":
                return 0
            r %= Lr
        return rd_map[d][r]

    words = {}
    for d in range(Ld):
        for r in range(Lr):
            vals = [(cell(d + a, r + b), b) for a, b in offs]
            if kind == "ca":
                s = sum(v for v, _ in vals)
            elif kind in ("go", "so"):
                lag = sum(v for v, b in vals if b < 0)
                lead = sum(v for v, b in vals if b > 0)
                s = max(lag, lead) if kind == "go" else min(lag, lead)
            else:
                s = sorted(v for v, _ in vals)[det_c["rank"] - 1]
            t0 = rnd(s * A)
            t = min(t0, 2**w_t - 1) if fx["overflow"] == "saturate" else t0 % 2**w_t
            x = rd_map[d][r]
            c = x << f_t
            det = c > t if det_c["compare"] == ">" else c >= t
            range_fits = Hr <= r <= Lr - 1 - Hr
            doppler_fits = Hd <= d <= Ld - 1 - Hd
            v = range_fits and (doppler_fits or mp["doppler_edge"] == "circular")
            if (mp["range_edge"] == "skip" and not range_fits) or (mp["doppler_edge"] == "skip" and not doppler_fits):
                t, det = 0, False
            words[d, r] = (x, t, det, v)
    # Section 8: stream order (docs/bit-true-2d.md section 1).
    if mp["order"] == "doppler-fast":
        order = [(d, r) for r in range(Lr) for d in range(Ld)]
    else:
        order = [(d, r) for d in range(Ld) for r in range(Lr)]
    return [words[k] + (i == len(order) - 1,) for i, k in enumerate(order)]


CASES = [
    ("ca", "ring", "doppler-fast", "zero-pad", "circular", "half-up", "saturate", None, ">"),
    ("go", "ring", "range-fast", "skip", "skip", "floor", "saturate", None, ">="),
    ("so", "cross", "doppler-fast", "circular", "zero-pad", "half-even", "wrap", 5, ">"),
    ("os", "ring", "range-fast", "circular", "circular", "half-up", "saturate", 4, ">="),
    ("os", "cross", "doppler-fast", "skip", "circular", "floor", "wrap", None, ">"),
]


@pytest.mark.parametrize("case", CASES, ids=[f"{c[0]}-{c[1]}-{c[2]}" for c in CASES])
def test_fast_model_equals_the_documents(case):
    kind, window, order, redge, dedge, rounding, overflow, t_bits, cmp = case
    cfg = {
        "detector": {"kind": kind, "alpha": 3.7, "compare": cmp, **({"rank": 3} if kind == "os" else {})},
        "fixed": {"input_bits": 5, "alpha_frac_bits": 7, "threshold_frac_bits": 2, "rounding": rounding,
                  "overflow": overflow, **({"threshold_bits": t_bits} if t_bits else {})},
        "map": {"range_cells": 11, "doppler_bins": 8, "order": order, "window": window, "ref_range": 2,
                "ref_doppler": 1, "guard_range": 1, "guard_doppler": 1, "range_edge": redge, "doppler_edge": dedge},
    }
    spec = spec_from_dict(cfg)
    rng = np.random.default_rng(zlib.crc32(repr(case).encode()))
    maps = [rng.integers(0, 32, (8, 11)), np.full((8, 11), 31), np.where(rng.random((8, 11)) < 0.1, 31, 0)]
    for rd in maps:
        want = doc_words(cfg, rd.tolist())
        x = spec.stream_cells(rd).astype(np.int64)
        last = np.zeros(x.size, dtype=bool)
        last[-1] = True
        out = run_map_fast(spec, x, last)
        got = list(zip(out.cut.tolist(), out.threshold.tolist(), out.det.tolist(), out.valid.tolist(),
                       out.last.tolist()))
        assert got == want

"""The [map] section of the block spec (refmodel/map_spec.py): validation, derived widths, round trip.

Widths are checked against their formulas evaluated here (docs/bit-true-2d.md, docs/block-spec.md),
alpha against the published false-alarm formulas, never against values printed by the code.
"""

from __future__ import annotations

import copy
import math
import tomllib
from pathlib import Path

import pytest
from scipy import integrate, stats

from refmodel.block_spec import load_spec, spec_from_dict
from refmodel.errors import SpecError
from refmodel.map_spec import MapSpec

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "lagoon_map_ca.toml"

BASE = {
    "detector": {"kind": "ca", "design_pfa": 1e-6},
    "fixed": {"input_bits": 12, "alpha_frac_bits": 12},
    "map": {"range_cells": 64, "doppler_bins": 16, "ref_range": 3, "ref_doppler": 2, "guard_range": 1,
            "guard_doppler": 1},
}


def _spec(**over) -> MapSpec:
    d = copy.deepcopy(BASE)
    for key, value in over.items():
        sec, name = key.split("__")
        if value is None:
            d[sec].pop(name, None)
        else:
            d.setdefault(sec, {})[name] = value
    return spec_from_dict(d)


def test_example_is_a_map_block_labelled_invented():
    text = EXAMPLE.read_text()
    assert "INVENTED SCENARIO" in text
    spec = load_spec(EXAMPLE)
    assert isinstance(spec, MapSpec)
    assert (spec.range_cells, spec.doppler_bins, spec.order) == (256, 64, "doppler-fast")


def test_counts_and_ca_alpha_against_finn_johnson():
    s = _spec()
    # Counted by hand: window 7 x 9 = 63 cells, guard rectangle 3 x 3 = 9, ring 54; range halves
    # 7 rows x 4 columns minus the 3 x 1 guard cells beside the CUT = 25 each.
    assert (s.n_cells, s.n_half) == (54, 25)
    # Finn & Johnson 1968 (RCA Review 29(3)); Richards 2005 sec. 7.3: Pfa = (1 + alpha/N)^-N.
    N = 54
    assert math.isclose(s.alpha, N * (1e-6 ** (-1 / N) - 1), rel_tol=1e-9)
    assert math.isclose((1 + s.alpha / N) ** -N, 1e-6, rel_tol=1e-9)


def test_widths_follow_their_formulas():
    s = _spec()
    full, N = (1 << 12) - 1, 54
    A = math.floor(s.alpha * 2**12 / N + 0.5)  # docs/bit-true.md section 4, mean divisor N
    assert s.alpha_int == A
    assert s.statistic_bits == (N * full).bit_length() == s.sum_bits
    t_max = (N * full * A + (1 << 11)) >> 12  # half-up rounding of the largest product, d = 12
    assert s.threshold_bits == t_max.bit_length()
    assert s.output_bits == 12 + s.threshold_bits + 3
    # doppler-fast: Doppler is the fast axis (Hd = 3), range the slow axis (Hr = 4).
    assert (s.slow_fast["slow"]["axis"], s.slow_fast["fast"]["axis"]) == ("range", "doppler")
    P_f = 16 + 2 * 3
    assert s.padded_line == P_f and s.padded_lines == 64 + 2 * 4
    assert s.line_buffer_bits == 2 * 4 * P_f * 12
    # circular along the (fast) Doppler axis: two line stores of L_f cells.
    assert s.store_cells == 16 and s.store_bits == 2 * 16 * 12
    assert s.latency_cycles == 16 + 2 * (4 * P_f + 3) + 2
    assert s.drain_cycles == (64 + 8) * P_f - 64 * 16


def test_range_fast_with_circular_doppler_stores_the_map():
    s = _spec(map__order="range-fast")
    assert s.store_cells == 64 * 16 and s.store_bits == 64 * 16 * 12
    assert s.line_buffer_bits == 2 * 3 * (64 + 8) * 12


def _go_so_pfa(alpha, n, which):
    """Hansen & Sawyers, IEEE Trans. AES-16(1), 1980 (GO); Gandhi & Kassam, IEEE Trans. AES-24(4), 1988:
    half sums i.i.d. Gamma(n, 1), estimate max/min of the half means, Pfa = E[exp(-alpha * est)]."""
    g = stats.gamma(n)
    other = g.cdf if which == "go" else g.sf
    return integrate.quad(lambda y: 2 * g.pdf(y) * other(y) * math.exp(-alpha * y / n), 0, math.inf,
                          epsabs=1e-15, epsrel=1e-10)[0]


@pytest.mark.parametrize("kind", ["go", "so"])
def test_go_so_design_uses_the_two_range_halves(kind):
    s = _spec(detector__kind=kind, detector__design_pfa=1e-4)
    assert s.mean_divisor == s.n_half == 25
    assert math.isclose(_go_so_pfa(s.alpha, 25, kind), 1e-4, rel_tol=1e-6)


def test_os_design_against_rohling():
    s = _spec(detector__kind="os", detector__rank=40, detector__design_pfa=1e-5)
    # Rohling, IEEE Trans. AES-19(4), 1983: Pfa = prod_{i<k} (N-i)/(N-i+alpha).
    pfa = math.prod((54 - i) / (54 - i + s.alpha) for i in range(40))
    assert math.isclose(pfa, 1e-5, rel_tol=1e-8)
    assert s.statistic_bits == 12


def test_cross_window_counts():
    s = _spec(map__window="cross")
    assert (s.n_cells, s.n_half) == (2 * 2 + 2 * 3, 3)


def test_round_trip():
    for over in ({}, {"map__window": "cross", "detector__kind": "so"}, {"map__order": "range-fast"},
                 {"detector__kind": "os", "detector__rank": 5, "detector__design_pfa": None, "detector__alpha": 9.0}):
        s = _spec(**over)
        assert spec_from_dict(s.to_dict()) == s
        assert spec_from_dict(s.to_dict(resolved=True)).alpha_int == s.alpha_int


BAD = [
    ("map.range_cells", {"map__range_cells": None}),
    ("map.range_cells", {"map__range_cells": 8}),  # window is 9 range cells wide
    ("map.doppler_bins", {"map__doppler_bins": 6}),  # 7 Doppler bins tall
    ("map.range_cells", {"map__range_cells": 65536, "map__doppler_bins": 512}),
    ("map.order", {"map__order": "raster"}),
    ("map.window", {"map__window": "box"}),
    ("map.ref_range", {"map__ref_range": -1}),
    ("map.ref_range", {"map__ref_range": 0, "map__ref_doppler": 0}),
    ("map.ref_doppler", {"map__ref_doppler": 1.5}),
    ("map.guard_doppler", {"map__guard_doppler": True}),
    ("map.ref_range", {"detector__kind": "go", "map__window": "cross", "map__ref_range": 0}),
    ("map.range_edge", {"map__range_edge": "one-sided"}),
    ("map.doppler_edge", {"map__doppler_edge": "wrap"}),
    ("map.colour", {"map__colour": 1}),
    ("detector.ref_cells_per_side", {"detector__ref_cells_per_side": 4}),
    ("detector.edge", {"detector__edge": "skip"}),
    ("detector.rank", {"detector__kind": "os", "detector__rank": 55}),
    ("detector.rank", {"detector__rank": 3}),
    ("fixed.sum_bits", {"fixed__sum_bits": 30}),
    ("stream.frame_length", {"stream__frame_length": 100}),
    ("fixed.mean_by_shift", {"fixed__mean_by_shift": True}),  # N = 54
    ("fixed.input_bits", {"fixed__input_bits": 0}),
    ("detector.alpha", {"detector__alpha": 2.0}),  # both alpha and design_pfa
]


@pytest.mark.parametrize("field,over", BAD, ids=[f"{f}-{i}" for i, (f, _) in enumerate(BAD)])
def test_bad_values_name_the_field(field, over):
    with pytest.raises(SpecError) as exc:
        _spec(**over)
    assert exc.value.field == field
    assert exc.value.allowed and "\n" not in str(exc.value)


def test_mean_by_shift_with_a_power_of_two_ring():
    # Rr = 1, Rd = 0, Gr = 0, Gd = 0: the ring is the 2 range neighbours, N = 2 (a power of two).
    s = _spec(map__ref_range=1, map__ref_doppler=0, map__guard_range=0, map__guard_doppler=0,
              fixed__mean_by_shift=True)
    assert s.n_cells == 2 and s.mean_shift == 1


def test_one_d_only_steps_stop_with_one_line():
    s = _spec()
    with pytest.raises(SpecError) as exc:
        _ = s.ref_per_side
    assert exc.value.field == "map"


def test_spec_toml_text_loads(tmp_path):
    p = tmp_path / "m.toml"
    p.write_text(EXAMPLE.read_text())
    assert tomllib.loads(p.read_text())["map"]["window"] == "ring"
    assert load_spec(p).source == str(p)

"""The range-Doppler reference core ``cfar_map`` against the bit-accurate map model, through its pure-Verilog bench.

Each configuration writes a vector set with :func:`vectors.vector_set.write_vector_set`
(directed corner-case maps, an invented scenario and random maps; expected
words from ``refmodel.fixedpoint.map_fast``, the vectorised form of
``docs/bit-true-2d.md``), and for some configurations the expected words are
also recomputed with the structural model ``refmodel.fixedpoint.map_struct``
(line buffers and running sums stepped cell by cell), so that the core is
held to the contract and not only to one implementation of it. The words
go through ``hdl_tb/rtl/cfar_map_tb.v`` under Icarus Verilog
(``$readmemh``, IEEE Std 1364-2005, 17.2.9), which must print PASS. The
bench also checks ``m_axis_tlast`` (end of each fast-axis line) and
``m_axis_tuser`` (start of each map) on every word, the AXI4-Stream output
handshake (ARM IHI 0051A, section 2.2.1: once TVALID is high it stays high
with TDATA stable until the transfer) and, with neither axis circular and
no stalls, that ``s_axis_tready`` is low exactly in the pad steps of the
window stream (``docs/bit-true-2d.md`` section 2) and, at full rate, the
latency ``H_s P_f + H_f + pipeline_stages`` (section 9). The configurations
cover CA, GO and SO, ring and cross windows, both streaming orders, skip,
zero-pad and circular on each axis (no store, two line stores, the map
store), widths from 4 to 24 bits, 2 to 6 pipeline stages, gaps, stalls, a
sink that waits for TVALID, and a reset in the middle of a map.
"""

from __future__ import annotations

import shutil

import numpy as np
import pytest

from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

from hdl_tb.core_params import core_parameters, map_core_latency_cycles  # noqa: E402
from hdl_tb.verilog_bench import BenchCompileError, compile_bench, run_bench  # noqa: E402
from vectors.vector_set import write_vector_set  # noqa: E402


def map_spec(*, kind="ca", window="ring", order="doppler-fast", range_edge="zero-pad", doppler_edge="circular",
             range_cells=16, doppler_bins=12, ref=(1, 2), guard=(1, 1), input_bits=10, stages=2, alpha=None,
             fixed=None, compare=">", maps=(1, 2)):
    """A small map block (``ref``, ``guard`` = (Doppler, range) extents per side)."""
    det = {"kind": kind, "alpha": alpha if alpha is not None else (1.7 if kind == "ca" else 3.1),
           "compare": compare}
    fx = {"input_bits": input_bits, "alpha_frac_bits": 8, "rounding": "half-up"}
    fx.update(fixed or {})
    return spec_from_dict({
        "detector": det, "fixed": fx, "stream": {"pipeline_stages": stages},
        "map": {"range_cells": range_cells, "doppler_bins": doppler_bins, "order": order, "window": window,
                "ref_doppler": ref[0], "ref_range": ref[1], "guard_doppler": guard[0], "guard_range": guard[1],
                "range_edge": range_edge, "doppler_edge": doppler_edge},
        "vectors": {"seed": 11, "scenario_maps": maps[0], "random_maps": maps[1]},
    })


#: (name, spec arguments): kinds x windows x orders x edges x widths x stages.
CONFIGS = [
    ("ca-ring-df-lines", dict()),
    ("ca-ring-df-direct", dict(range_edge="zero-pad", doppler_edge="zero-pad", input_bits=16, stages=3)),
    ("go-ring-rf-skip", dict(kind="go", order="range-fast", range_edge="skip", doppler_edge="skip",
                             input_bits=8, stages=3)),
    ("so-cross-rf-skip-zero", dict(kind="so", window="cross", order="range-fast", range_edge="skip",
                                   doppler_edge="zero-pad", stages=4)),
    ("ca-cross-both-circular", dict(window="cross", range_edge="circular", doppler_edge="circular", stages=5,
                                    fixed={"rounding": "half-even", "overflow": "wrap", "threshold_bits": 9})),
    ("ca-ring-rf-map-store", dict(order="range-fast", input_bits=12,
                                  fixed={"rounding": "floor", "truncate_partials": True})),
    ("go-ring-df-range-circular", dict(kind="go", range_edge="circular", doppler_edge="skip", compare=">=",
                                       ref=(2, 1), guard=(0, 1), doppler_bins=9)),
    ("so-ring-no-guard", dict(kind="so", guard=(0, 0), ref=(1, 1), input_bits=4, range_edge="skip",
                              doppler_edge="zero-pad", stages=6)),
    ("ca-cross-doppler-arms-only", dict(window="cross", ref=(2, 0), guard=(1, 1), input_bits=24,
                                        range_edge="zero-pad", doppler_edge="circular",
                                        fixed={"threshold_frac_bits": 2})),
    ("ca-ring-minimal-map", dict(range_cells=7, doppler_bins=5, ref=(1, 2), guard=(1, 1), order="range-fast",
                                 range_edge="skip", doppler_edge="circular")),
]


@pytest.fixture(scope="module")
def vector_sets(tmp_path_factory):
    """One vector set per configuration, written once."""
    root = tmp_path_factory.mktemp("map_sets")
    sets = {}
    for name, kw in CONFIGS:
        spec = map_spec(**kw)
        write_vector_set(spec, root / name)
        sets[name] = (spec, root / name)
    return sets


@pytest.mark.parametrize("name", [c[0] for c in CONFIGS])
@pytest.mark.parametrize("gap, stall, sink", [(0, 0, "independent"), (20, 30, "independent"),
                                              (10, 25, "waits-for-valid")])
def test_core_matches_map_model(vector_sets, tmp_path, name, gap, stall, sink):
    spec, folder = vector_sets[name]
    r = run_bench(spec, folder, gap_percent=gap, stall_percent=stall, seed=7, sink=sink,
                  build_root=tmp_path.parent / "map_core_builds")
    assert r.passed, f"{name}: {r.first_mismatch}\n{r.log[-2000:]}"
    assert r.n_words == spec.map_cells * (len((folder / "stimulus.hex").read_text().split()) // spec.map_cells)


@pytest.mark.parametrize("name", ["ca-ring-df-direct", "ca-cross-both-circular", "go-ring-df-range-circular",
                                  "so-cross-rf-skip-zero"])
def test_expected_words_are_those_of_the_structural_model(vector_sets, name):
    # The same words from the cell-by-cell structural model (docs/bit-true-2d.md section 3).
    from refmodel.fixedpoint.map_struct import run_map_structural
    from refmodel.fixedpoint.word_format import pack_output

    spec, folder = vector_sets[name]
    stim = np.array([int(w, 16) for w in (folder / "stimulus.hex").read_text().split()], dtype=np.int64)
    x, last = stim & ((1 << spec.input_bits) - 1), (stim >> spec.input_bits) & 1
    out = run_map_structural(spec, x, last.astype(bool))
    words = [int(w) for w in pack_output(spec, out)]
    assert words == [int(w, 16) for w in (folder / "expected.hex").read_text().split()]


@pytest.mark.parametrize("name", ["ca-ring-df-lines", "ca-ring-df-direct", "ca-ring-rf-map-store",
                                  "so-cross-rf-skip-zero"])
@pytest.mark.parametrize("where", ["first map", "middle"])
def test_reset_mid_map_recovers_at_the_next_map(vector_sets, tmp_path, name, where):
    spec, folder = vector_sets[name]
    n = spec.map_cells
    at = n // 2 if where == "first map" else 3 * n + n // 3
    r = run_bench(spec, folder, reset_at=at, stall_percent=20 if where == "middle" else 0,
                  build_root=tmp_path.parent / "map_core_builds")
    assert r.passed, f"{name}: {r.first_mismatch}"


def test_bench_reports_a_wrong_word_with_its_map_line_and_position(vector_sets, tmp_path):
    spec, folder = vector_sets["ca-ring-df-lines"]
    words = (folder / "expected.hex").read_text().split()
    k = 2 * spec.map_cells + 3 * spec.doppler_bins + 5  # map 2, line 3, position 5 (doppler-fast: L_f = L_d)
    words[k] = format(int(words[k], 16) ^ (1 << spec.input_bits), "x")  # threshold LSB
    (tmp_path / "expected.hex").write_text("\n".join(words) + "\n")
    shutil.copy(folder / "stimulus.hex", tmp_path / "stimulus.hex")
    r = run_bench(spec, tmp_path, build_root=tmp_path.parent / "map_core_builds")
    assert not r.passed and r.n_mismatches == 1
    assert r.first_mismatch.startswith(f"word {k} map 2 cell {3 * spec.doppler_bins + 5} (line 3, position 5)")


def test_latency_and_parameters():
    spec = map_spec(range_edge="zero-pad", doppler_edge="skip", stages=3)
    # H_s P_f + H_f + stages: doppler-fast, slow = range (H = 3), fast = Doppler (H = 2, P_f = 12 + 4).
    assert map_core_latency_cycles(spec) == 3 * 16 + 2 + 3
    p = core_parameters(spec)
    assert (p["RANGE_CELLS"], p["DOPPLER_BINS"], p["ORDER"], p["WINDOW"], p["KIND"]) == (16, 12, 0, 0, 0)
    assert (p["REF_RANGE"], p["REF_DOPPLER"], p["GUARD_RANGE"], p["GUARD_DOPPLER"]) == (2, 1, 1, 1)
    assert (p["RANGE_EDGE"], p["DOPPLER_EDGE"]) == (1, 0)
    # N = 5 x 7 - 3 x 3 = 26 cells of at most 1023: bitlen(26 * 1023) = 15.
    assert p["SUM_BITS"] == 15
    with pytest.raises(SpecError, match="map.doppler_edge"):
        map_core_latency_cycles(map_spec())


def test_refusals_name_the_field():
    with pytest.raises(SpecError, match=r"^detector\.kind"):
        core_parameters(_os_spec())
    with pytest.raises(SpecError, match=r"^stream\.pipeline_stages"):
        core_parameters(map_spec(stages=1))
    # A user's own core gets the parameters anyway.
    assert core_parameters(_os_spec(), reference_core=False)["KIND"] == 3


def _os_spec():
    return spec_from_dict({"detector": {"kind": "os", "rank": 10, "alpha": 2.0}, "fixed": {"input_bits": 8},
                           "map": {"range_cells": 16, "doppler_bins": 12, "ref_range": 2, "ref_doppler": 1,
                                   "guard_range": 1, "guard_doppler": 1}})


@pytest.mark.parametrize("override, message", [
    ({"KIND": 3}, "KIND 3 os is not supported by the map core"),
    ({"PIPELINE_STAGES": 1}, "PIPELINE STAGES must be at least 2"),
    ({"SUM_BITS": 14}, "SUM BITS below bitlen of the largest part sum"),
    ({"RANGE_EDGE": 2}, "RANGE EDGE must be 0 skip 1 zero pad or 3 circular"),
    ({"DOPPLER_BINS": 4}, "DOPPLER BINS below the window Doppler extent"),
    ({"KIND": 1, "REF_RANGE": 0, "GUARD_RANGE": 0}, "GO and SO need non empty range halves"),
])
def test_illegal_parameters_stop_elaboration(tmp_path, override, message):
    params = {**core_parameters(map_spec(range_edge="zero-pad", doppler_edge="zero-pad")), **override}
    with pytest.raises(BenchCompileError, match=f"illegal parameter combination for cfar_map: {message}"):
        compile_bench(params, max_words=16, build_root=tmp_path)

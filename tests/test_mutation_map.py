"""The map vectors must catch every seeded bug of the map core (hdl_tb.mutation, map campaign).

Each mutant is a copy of ``hdl_tb/rtl/cfar_map.v`` with one rule of
``docs/bit-true-2d.md`` (window, rectangles, edges, validity), of
``docs/bit-true.md`` (the arithmetic after the statistic) or of the
AXI4-Stream handshake and sideband signals (ARM IHI 0051A, section 2.2.1)
broken; the pure-Verilog bench ``cfar_map_tb``, fed with the vector set of
each map check spec under input gaps and output backpressure, with both
kinds of sink that section 2.2.1 allows and with a reset in the middle of a
map, must fail it. So that a kill cannot come from a broken harness, the
unmodified core passes the very same runs word for word against the
expected files the vector generator wrote.

``CFARVEC_LONG=1`` uses larger vector sets.
"""

from __future__ import annotations

import os
import re
import shutil
from pathlib import Path

import pytest

from hdl_tb import mutation
from hdl_tb.core_params import MAP_CORE_SOURCES
from hdl_tb.verilog_bench import run_bench

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

ROOT = Path(__file__).resolve().parents[1]
LONG = bool(os.environ.get("CFARVEC_LONG"))
VECTORS = mutation.MAP_CHECK_VECTORS_LONG if LONG else mutation.MAP_CHECK_VECTORS


def _sections(doc: str) -> set[str]:
    return set(re.findall(r"^## (\d+)\. ", (ROOT / "docs" / doc).read_text(encoding="utf-8"), flags=re.MULTILINE))


def test_every_map_mutant_applies_once_and_names_the_rule_it_breaks():
    core = MAP_CORE_SOURCES[0].read_text(encoding="ascii")
    sections = {"bit-true-2d": _sections("bit-true-2d.md"), "bit-true": _sections("bit-true.md")}
    names = [m.name for m in mutation.MAP_MUTANTS]
    assert len(names) == len(set(names)) and len(names) >= 12
    for m in mutation.MAP_MUTANTS:
        assert core.count(m.find) == 1, m.name
        assert mutation.apply_mutant(core, m) != core, m.name
        rule = re.match(r"(bit-true-2d|bit-true) (\d+): |AXI4-Stream: ", m.breaks)
        assert rule, f"{m.name}: {m.breaks!r} names no section of the bit-true documents nor AXI4-Stream"
        assert rule.group(1) is None or rule.group(2) in sections[rule.group(1)], f"{m.name}: no such section"


def test_map_check_specs_cover_the_core():
    specs = mutation.map_check_specs()
    assert {s.kind for s in specs.values()} == {"ca", "go"}
    assert {s.window.shape for s in specs.values()} == {"ring", "cross"}
    # No store, two line stores (circular fast axis), the map store (circular slow axis).
    assert {0, min(s.store_cells for s in specs.values() if s.store_cells)} <= {s.store_cells for s in specs.values()}
    assert any(s.store_cells == s.map_cells for s in specs.values())
    assert {"skip", "zero-pad", "circular"} <= {s.range_edge for s in specs.values()} | {
        s.doppler_edge for s in specs.values()}
    assert any(r.reset_mid_map for r in mutation.MAP_RUNS)
    assert {r.sink for r in mutation.MAP_RUNS} == {"independent", "waits-for-valid"}


@pytest.fixture(scope="module")
def work(tmp_path_factory):
    return tmp_path_factory.mktemp("map_mutation")


@pytest.fixture(scope="module")
def check_sets(work):
    return mutation.write_check_sets(mutation.map_check_specs(VECTORS), work)


def test_unmodified_map_core_passes_the_same_runs(check_sets, work):
    for s in check_sets:
        expected = [int(w, 16) for w in (s.folder / "expected.hex").read_text(encoding="ascii").split()]
        for run in mutation.MAP_RUNS:
            if run.reset_mid_map:
                continue  # the words of the reset map are not received; the bench checks the rest
            r = run_bench(s.spec, s.folder, gap_percent=run.gap_percent, stall_percent=run.stall_percent,
                          seed=run.seed, build_root=work / "reference", sink=run.sink)
            assert r.passed, f"{s.name} {run}: {r.first_mismatch}"
            assert [int(w, 16) for w in r.received_file.read_text(encoding="ascii").split()] == expected


def test_every_map_mutant_is_killed(check_sets, work):
    results = mutation.run_map_mutation_check({s.name: s.spec for s in check_sets},
                                              work_dir=work / "check").results
    report = mutation.MutationReport(results)
    print("\n".join(report.lines()))
    assert [r.mutant.name for r in results] == [m.name for m in mutation.MAP_MUTANTS]
    assert report.survivors == [], "\n".join(report.lines())
    by = {r.mutant.name: r.killed_by for r in results}
    # ARM IHI 0051A 2.2.1: TVALID that waits for TREADY deadlocks only a sink that waits for TVALID.
    assert " sink waits-for-valid: deadlock: output never became valid" in by["map_valid_waits_for_ready"]
    # Ignoring the start-of-map marker shows only after a reset in the middle of a map.
    for name in ("map_start_marker_ignored_without_store", "map_start_marker_ignored_with_store"):
        assert " reset mid-map: " in by[name], by[name]


def test_script_refuses_bad_map_vector_settings(tmp_path, capsys):
    spec = tmp_path / "bad.toml"
    text = (ROOT / "examples" / "lagoon_map_ca.toml").read_text(encoding="utf-8")
    spec.write_text(text.replace("random_maps = 2", "random_maps = -1"), encoding="utf-8")
    assert mutation.main([str(spec)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "vectors.random_maps" in err

"""The golden vectors must catch every seeded bug of the reference core (hdl_tb.mutation).

The mutation check itself is the test that the vectors have teeth: each mutant
is a copy of ``hdl_tb/rtl/cfar_stream.v`` with one rule of ``docs/bit-true.md``
or of the AXI4-Stream handshake (ARM IHI 0051A, section 2.2.1) broken, and
the pure-Verilog bench, fed with the vector set of each check spec under input
gaps and output backpressure, must fail it. The runs use both kinds of sink
that section 2.2.1 allows: one that raises TREADY without looking at TVALID
and one that waits for TVALID first, which alone can see a core whose TVALID
waits for TREADY. So that a kill cannot come from a broken harness, the
unmodified core must pass the very same runs, word for word against the
expected files the vector generator wrote.

``CFARVEC_LONG=1`` uses much larger vector sets and adds a full-rate run and
a run with heavy gaps and backpressure.
"""

from __future__ import annotations

import os
import re
import shutil
from pathlib import Path

import pytest

from hdl_tb import mutation
from hdl_tb.core_params import CORE_SOURCES
from hdl_tb.verilog_bench import run_bench

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

ROOT = Path(__file__).resolve().parents[1]
LONG = bool(os.environ.get("CFARVEC_LONG"))
VECTORS = mutation.CHECK_VECTORS_LONG if LONG else mutation.CHECK_VECTORS
RUNS = mutation.LONG_RUNS if LONG else mutation.DEFAULT_RUNS


def test_every_mutant_applies_once_and_names_the_rule_it_breaks():
    core = CORE_SOURCES[0].read_text(encoding="ascii")
    sections = set(re.findall(r"^## (\d+)\. ", (ROOT / "docs" / "bit-true.md").read_text(encoding="utf-8"),
                              flags=re.MULTILINE))
    names = [m.name for m in mutation.MUTANTS]
    assert len(names) == len(set(names)) and len(names) >= 12
    for m in mutation.MUTANTS:
        assert mutation.apply_mutant(core, m) != core, m.name
        rule = re.match(r"bit-true (\d+): |AXI4-Stream: ", m.breaks)
        assert rule, f"{m.name}: {m.breaks!r} names neither a bit-true.md section nor the AXI4-Stream handshake"
        assert rule.group(1) is None or rule.group(1) in sections, f"{m.name}: no section {rule.group(1)}"


def test_a_mutant_that_no_longer_applies_fails_loudly():
    m = mutation.MUTANTS[0]
    core = CORE_SOURCES[0].read_text(encoding="ascii")
    with pytest.raises(mutation.StaleMutantError, match="0 times"):
        mutation.apply_mutant(core.replace(m.find, "/* rewritten */"), m)
    with pytest.raises(mutation.StaleMutantError, match="2 times"):
        mutation.apply_mutant(core + m.find, m)


@pytest.fixture(scope="module")
def work(tmp_path_factory):
    return tmp_path_factory.mktemp("mutation")


@pytest.fixture(scope="module")
def check_sets(work):
    return mutation.write_check_sets(mutation.check_specs(VECTORS), work)


def test_unmodified_core_passes_the_same_runs(check_sets, work):
    """Word for word against the generator's expected files, under the mutants' gaps and backpressure."""
    for s in check_sets:
        expected = [int(w, 16) for w in (s.folder / "expected.hex").read_text(encoding="ascii").split()]
        for run in RUNS:
            r = run_bench(s.spec, s.folder, gap_percent=run.gap_percent, stall_percent=run.stall_percent,
                          seed=run.seed, build_root=work / "reference", sink=run.sink)
            assert r.passed, f"{s.name} {run}: {r.first_mismatch}"
            assert [int(w, 16) for w in r.received_file.read_text(encoding="ascii").split()] == expected


def test_every_mutant_is_killed(check_sets, work):
    results = mutation.run_mutation_check({s.name: s.spec for s in check_sets}, runs=RUNS,
                                          work_dir=work / "check").results
    report = mutation.MutationReport(results)
    print("\n".join(report.lines()))
    assert [r.mutant.name for r in results] == [m.name for m in mutation.MUTANTS]
    assert report.survivors == [], "\n".join(report.lines())
    assert report.lines()[-1] == f"killed {len(results)} of {len(results)} mutants (100.0 %)"
    # ARM IHI 0051A 2.2.1: TVALID that waits for TREADY deadlocks only a sink that waits for TVALID.
    waits = next(r for r in results if r.mutant.name == "valid_waits_for_ready")
    assert " sink waits-for-valid: deadlock: output never became valid while the sink waited for TVALID" \
        in waits.killed_by


def test_runs_use_both_kinds_of_sink():
    # ARM IHI 0051A 2.2.1: a sink may raise TREADY before TVALID, or wait for TVALID first.
    for runs in (mutation.DEFAULT_RUNS, mutation.LONG_RUNS):
        assert {r.sink for r in runs} == {"independent", "waits-for-valid"}
    assert mutation.BenchRun(20, 30, 8, "waits-for-valid").describe() == "gap 20 stall 30 seed 8 sink waits-for-valid"
    assert mutation.BenchRun(20, 30, 7).describe() == "gap 20 stall 30 seed 7"


def test_script_refuses_bad_vector_settings(tmp_path, capsys):
    spec = tmp_path / "bad.toml"
    text = (ROOT / "examples" / "channel_os.toml").read_text(encoding="utf-8")
    spec.write_text(text + "\n[vectors]\nrandom_frames = -1\n", encoding="utf-8")
    assert mutation.main([str(spec)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "vectors.random_frames" in err


def test_new_logic_has_its_own_mutants_and_check_specs():
    """OS and circular (docs/bit-true.md sections 2, 3 and 9) each have mutants, and check specs to show them."""
    names = [m.name for m in mutation.MUTANTS]
    assert sum(n.startswith("os_") for n in names) >= 6
    assert sum(n.startswith("circular_") for n in names) >= 6
    specs = mutation.check_specs()
    assert {s.kind for s in specs.values()} >= {"ca", "go", "os"}
    assert {s.edge for s in specs.values()} == {"skip", "zero-pad", "one-sided", "circular"}
    ranks = {(s.rank, s.n_ref) for s in specs.values() if s.kind == "os"}
    assert any(k % 2 == 1 for k, _ in ranks)  # ceil(k/2) differs from floor(k/2)
    assert any(k <= n // 2 for k, n in ranks) and any(k > n // 2 for k, n in ranks)

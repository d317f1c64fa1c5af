"""Shared builds (hdl_tb.shared_build): one build per design, reused by every run that fits, no timing.

Checked against what the test itself knows: which designs it asks for, how
many words each run needs, which builds its own build function was called
for. The rules come from the module's contract (``docs/testbench.md``,
"Regressions"): a design is named by its toplevel, simulator, parameters
other than ``MAX_WORDS``, waveform flag and source bytes; a build holds the
words of the run that made it plus a quarter, rounded up to a power of two
(common practice, no source), and a run that needs more gets a deeper build
of its own.
"""

from __future__ import annotations

import concurrent.futures
import json
import multiprocessing
from pathlib import Path

import pytest

from hdl_tb.shared_build import BUILD_LOG, STAMP_FILE, design_key, memory_depth, shared_build


def _builder(calls: list):
    def build(into: Path, depth: int) -> None:
        assert into.is_dir() and not any(into.iterdir())  # a fresh, empty folder
        (into / "image").write_text(str(depth))
        calls.append((into.name, depth))
    return build


def test_one_build_serves_every_run_that_fits(tmp_path):
    calls: list = []
    build = _builder(calls)
    first = shared_build(tmp_path, "top-icarus-abc", 1000, build)
    # 1000 + 250 words, rounded up to a power of two.
    assert first == (tmp_path / "top-icarus-abc-w2048", 2048, True)
    for words in (900, 1100, 1250, 2048):  # other seeds: a little shorter or longer, all fit
        assert shared_build(tmp_path, "top-icarus-abc", words, build) == (first[0], 2048, False)
    assert calls == [("top-icarus-abc-w2048", 2048)]
    deeper = shared_build(tmp_path, "top-icarus-abc", 3000, build)  # does not fit: a deeper build of its own
    assert deeper == (tmp_path / "top-icarus-abc-w4096", 4096, True)
    assert (first[0] / "image").read_text() == "2048"  # the first build is left as it was
    # The smallest build that fits is used.
    assert shared_build(tmp_path, "top-icarus-abc", 1500, build)[0] == first[0]
    other = shared_build(tmp_path, "top-verilator-abc", 1000, build)  # another design: another build
    assert other[2] and len(calls) == 3
    log = [json.loads(line) for line in (tmp_path / BUILD_LOG).read_text().splitlines()]
    assert [entry["build"] for entry in log] == [c[0] for c in calls]


def test_a_failed_build_is_not_reused(tmp_path):
    def broken(into: Path, depth: int) -> None:
        (into / "half").write_text("x")
        raise RuntimeError("does not compile")

    with pytest.raises(RuntimeError):
        shared_build(tmp_path, "top-icarus-abc", 10, broken)
    assert not list(tmp_path.glob(f"*/{STAMP_FILE}"))
    assert not (tmp_path / BUILD_LOG).exists()
    calls: list = []
    where, _, built = shared_build(tmp_path, "top-icarus-abc", 10, _builder(calls))
    assert built and not (where / "half").exists() and len(calls) == 1


def test_memory_depth():
    assert memory_depth(0) == 16
    assert memory_depth(12) == 16  # at least 16 words
    assert memory_depth(13) == 16
    assert memory_depth(62363) == 131072  # 77953 words rounded up
    assert memory_depth(3_000_189) == 4_194_304


def test_the_design_key_follows_sources_and_parameters_but_not_the_memory_depth(tmp_path):
    (tmp_path / "a.v").write_text("module a; endmodule\n")
    args = {"toplevel": "a", "sources": ["a.v"], "waves": False, "simulator": "icarus"}
    key = design_key(tmp_path, parameters={"N": 1, "MAX_WORDS": 1024}, **args)
    assert design_key(tmp_path, parameters={"N": 1, "MAX_WORDS": 4096}, **args) == key
    assert design_key(tmp_path, parameters={"N": 2, "MAX_WORDS": 1024}, **args) != key
    assert design_key(tmp_path, parameters={"N": 1}, **{**args, "simulator": "verilator"}) != key
    assert design_key(tmp_path, parameters={"N": 1}, **{**args, "waves": True}) != key
    copy = tmp_path / "copy"
    copy.mkdir()
    (copy / "a.v").write_text("module a; endmodule\n")  # another run's copy of the same file
    assert design_key(copy, parameters={"N": 1}, **args) == key
    (copy / "a.v").write_text("module a; wire w; endmodule\n")  # an edited file
    assert design_key(copy, parameters={"N": 1}, **args) != key


def _race(root: str, words: int) -> tuple[str, bool]:
    def build(into: Path, depth: int) -> None:
        (into / "image").write_text(str(depth))

    where, _, built = shared_build(Path(root), "top-icarus-abc", words, build)
    return where.name, built


def test_parallel_runs_build_a_design_once(tmp_path):
    ctx = multiprocessing.get_context("spawn")
    with concurrent.futures.ProcessPoolExecutor(2, mp_context=ctx) as pool:
        results = list(pool.map(_race, [str(tmp_path)] * 6, [500, 510, 490, 505, 520, 480]))
    assert len({name for name, _ in results}) == 1
    assert sum(built for _, built in results) == 1
    assert len((tmp_path / BUILD_LOG).read_text().splitlines()) == 1

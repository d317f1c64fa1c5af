"""Vector sets: files agree with the bit-accurate model, manifest, determinism, atomic writes.

Sources: IEEE Std 1364-2005 section 17.2.9 (the files are read with the
independent reader in ``test_vectors_readmem.py``), ``docs/bit-true.md``
sections 1 and 8 (stimulus and output word layout; the test packs words
itself from those tables), FIPS 180-4 (SHA-256 through :mod:`hashlib`).
The spec is the invented scenario in ``tests/data/vectors_small.toml``.
"""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
from importlib.metadata import version
from pathlib import Path

import numpy as np
import pytest
from test_vectors_readmem import read_memory_text

import vectors.vector_set as vector_set
from refmodel.block_spec import load_spec, spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.pipeline_fast import run_fast
from vectors.vector_set import vector_settings, write_vector_set

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "tests" / "data" / "vectors_small.toml"


def _spec(**vectors):
    spec = load_spec(SMALL)
    d = spec.to_dict()
    d["vectors"] = {**d.get("vectors", {}), **vectors}
    return spec_from_dict(d)


def _hashes(folder: Path, suffixes=(".hex", ".bin", ".csv")) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.iterdir())
            if p.suffix in suffixes}


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    out = tmp_path_factory.mktemp("set") / "small"
    spec = load_spec(SMALL)
    manifest = write_vector_set(spec, out)
    return spec, out, manifest


def test_files_read_back_give_the_models_words(built):
    spec, out, _ = built
    w_in, w_t = spec.input_bits, spec.threshold_bits
    stim = np.array(read_memory_text((out / "stimulus.hex").read_text(), 16), dtype=np.uint64)
    assert read_memory_text((out / "stimulus.bin").read_text(), 2) == stim.tolist()
    # docs/bit-true.md section 1: sample in [W_in-1:0], last marker in bit W_in.
    samples = (stim & np.uint64((1 << w_in) - 1)).astype(np.int64)
    last = ((stim >> np.uint64(w_in)) & np.uint64(1)).astype(bool)
    model = run_fast(spec, samples, last)
    # docs/bit-true.md section 8: cut [W_in-1:0], T [W_in+W_T-1:W_in], det, valid, last above it.
    want = [int(c) | int(t) << w_in | int(d) << (w_in + w_t) | int(v) << (w_in + w_t + 1)
            | int(e) << (w_in + w_t + 2)
            for c, t, d, v, e in zip(model.cut, model.threshold, model.det, model.valid, model.last)]
    assert read_memory_text((out / "expected.hex").read_text(), 16) == want
    assert read_memory_text((out / "expected.bin").read_text(), 2) == want
    csv = np.loadtxt(out / "expected.csv", delimiter=",", skiprows=1, dtype=np.int64)
    for i, name in enumerate(("cut", "threshold", "det", "valid", "last"), start=2):
        assert np.array_equal(csv[:, i], np.asarray(getattr(model, name), dtype=np.int64))
    stim_csv = np.loadtxt(out / "stimulus.csv", delimiter=",", skiprows=1, dtype=np.int64)
    assert np.array_equal(stim_csv[:, 2], samples) and np.array_equal(stim_csv[:, 3], last)
    # frame and index columns: frame number and position counted from the last markers.
    frame = np.concatenate(([0], np.cumsum(last)[:-1]))
    assert np.array_equal(stim_csv[:, 0], frame) and np.array_equal(csv[:, 0], frame)
    starts = np.flatnonzero(np.concatenate(([True], last[:-1])))
    index = np.arange(len(last)) - starts[frame]
    assert np.array_equal(stim_csv[:, 1], index) and np.array_equal(csv[:, 1], index)
    assert last[-1]


def test_manifest_describes_the_folder(built):
    spec, out, manifest = built
    on_disk = json.loads((out / "manifest.json").read_text())
    assert on_disk == manifest
    assert sorted(p.name for p in out.iterdir()) == sorted([f["name"] for f in manifest["files"]] + ["manifest.json"])
    widths = {"stimulus": spec.input_bits + 1, "expected": spec.input_bits + spec.threshold_bits + 3}
    for f in manifest["files"]:
        data = (out / f["name"]).read_bytes()
        assert f["sha256"] == hashlib.sha256(data).hexdigest()  # FIPS 180-4 via hashlib
        assert f["lines"] == data.count(b"\n")
        assert f["word_bits"] == widths[f["role"]]
        assert f["name"] == f"{f['role']}.{f['format']}"
    assert manifest["spec"] == spec.to_dict()
    assert manifest["derived"] == spec.derived()
    assert manifest["latency_cycles"] == spec.half_window + spec.pipeline_stages  # bit-true.md section 9
    assert manifest["tool_version"] == version("cfarvec")
    assert manifest["seed"] == 20261202
    stim = read_memory_text((out / "stimulus.hex").read_text(), 16)
    n_last = sum(w >> spec.input_bits for w in stim)
    assert manifest["totals"] == {"frames": n_last, "samples": len(stim)}
    assert [s["name"] for s in manifest["sources"]] == ["corner_cases", "scenario", "random"]
    assert sum(s["samples"] for s in manifest["sources"]) == len(stim)
    scen = manifest["sources"][1]
    assert scen["frames"] == 12 and scen["samples"] == 12 * spec.frame_length
    assert manifest["words"]["expected"]["fields"]["det"] == [spec.input_bits + spec.threshold_bits, 1]


def test_same_spec_and_seed_give_identical_bytes(built, tmp_path):
    spec, out, _ = built
    write_vector_set(spec, tmp_path / "again")
    assert _hashes(tmp_path / "again", (".hex", ".bin", ".csv", ".json")) == _hashes(out, (".hex", ".bin", ".csv",
                                                                                         ".json"))


def test_chunk_size_does_not_change_the_files(built, tmp_path):
    spec, out, _ = built
    write_vector_set(_spec(chunk_samples=777), tmp_path / "small_chunks")
    assert _hashes(tmp_path / "small_chunks") == _hashes(out)


def _source_words(folder: Path, name: str) -> list[int]:
    m = json.loads((folder / "manifest.json").read_text())
    s = next(s for s in m["sources"] if s["name"] == name)
    words = (folder / "stimulus.hex").read_text().split()
    return words[s["first_line"] - 1 : s["first_line"] - 1 + s["samples"]]


def test_sources_have_their_own_seeds(built, tmp_path):
    _, out, _ = built
    write_vector_set(_spec(random_frames=0, include_corner_cases=False), tmp_path / "scenario_only",
                     formats=["hex"])
    assert _source_words(tmp_path / "scenario_only", "scenario") == _source_words(out, "scenario")
    write_vector_set(_spec(scenario_frames=0), tmp_path / "no_scenario", formats=["hex"])
    assert _source_words(tmp_path / "no_scenario", "random") == _source_words(out, "random")
    write_vector_set(_spec(), tmp_path / "seed2", seed=2, formats=["hex"])
    assert _source_words(tmp_path / "seed2", "scenario") != _source_words(out, "scenario")
    assert _source_words(tmp_path / "seed2", "corner_cases") == _source_words(out, "corner_cases")


class _Boom(RuntimeError):
    pass


@pytest.mark.parametrize("error", [_Boom, KeyboardInterrupt])
def test_interrupted_run_leaves_nothing(tmp_path, monkeypatch, error):
    real = vector_set.FastPipeline

    class Failing(real):
        calls = 0

        def push(self, samples, last):
            Failing.calls += 1
            if Failing.calls == 3:
                raise error()
            return super().push(samples, last)

    monkeypatch.setattr(vector_set, "FastPipeline", Failing)
    with pytest.raises(error):
        write_vector_set(_spec(chunk_samples=500), tmp_path / "set")
    assert Failing.calls == 3
    assert list(tmp_path.iterdir()) == []  # no target, no temporary folder


def test_existing_folder_needs_force(built, tmp_path):
    spec, _, _ = built
    target = tmp_path / "set"
    target.mkdir()  # an empty folder is fine
    write_vector_set(spec, target, formats=["hex"])
    (target / "stray.txt").write_text("left by hand")
    with pytest.raises(SpecError) as e:
        write_vector_set(spec, target, formats=["hex"])
    assert e.value.field == "--output"
    assert (target / "stray.txt").exists()
    write_vector_set(spec, target, force=True, formats=["hex"])
    assert not (target / "stray.txt").exists() and (target / "manifest.json").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["set"]  # no temporary folders left
    afile = tmp_path / "file"
    afile.write_text("x")
    with pytest.raises(SpecError):
        write_vector_set(spec, afile, force=True)


@pytest.mark.parametrize("vectors, field", [
    ({"seed": -1}, "vectors.seed"),
    ({"scenario_frames": 1.5}, "vectors.scenario_frames"),
    ({"formats": ["hex", "txt"]}, "vectors.formats"),
    ({"formats": ["hex", 3]}, "vectors.formats"),
    ({"noise_level_lsb": 0}, "vectors.noise_level_lsb"),
    ({"noise_level_lsb": 5000}, "vectors.noise_level_lsb"),
    ({"targets": [{"cell": 64, "snr_db": 10}]}, "vectors.targets[0].cell"),
    ({"targets": [{"cell": 3, "snr_db": 10, "swerling": 2}]}, "vectors.targets[0].swerling"),
    ({"targets": [{"cell": 3, "snr_db": 10, "colour": 1}]}, "vectors.targets[0].colour"),
    ({"targets": [{"cell": 3}]}, "vectors.targets[0]"),
    ({"random_length_max": 5}, "vectors.random_length_max"),
    ({"chunk_samples": 0}, "vectors.chunk_samples"),
    ({"include_corner_cases": "yes"}, "vectors.include_corner_cases"),
    ({"shuffle": True}, "vectors.shuffle"),
    ({"include_corner_cases": False, "scenario_frames": 0, "random_frames": 0}, "vectors"),
])
def test_bad_vectors_fields_are_refused_before_writing(tmp_path, vectors, field):
    with pytest.raises(SpecError) as e:
        write_vector_set(_spec(**vectors), tmp_path / "set")
    assert e.value.field == field
    assert list(tmp_path.iterdir()) == []


def test_cli_bad_input_is_one_line_exit_2_in_a_real_process(tmp_path):
    bad_spec = tmp_path / "bad.toml"
    bad_spec.write_text(SMALL.read_text().replace("seed = 20261202", "seed = 20261202\nspeed = 3"))
    p = subprocess.run([sys.executable, "-m", "cfarvec", "vectors", str(bad_spec), "-o", str(tmp_path / "out")],
                       cwd=ROOT, capture_output=True, text=True, timeout=300)
    assert p.returncode == 2
    assert len(p.stderr.splitlines()) == 1 and "vectors.speed" in p.stderr and "Traceback" not in p.stderr
    assert sorted(x.name for x in tmp_path.iterdir()) == ["bad.toml"]


def test_cli_writes_refuses_and_reports_bad_input_in_one_line(tmp_path, capsys):
    from cfarvec import cli

    blocker = tmp_path / "plainfile"
    blocker.write_text("x")
    cases = [
        (["vectors", str(SMALL), "-o", str(tmp_path / "b"), "--seed", "-4"], "--seed"),
        (["vectors", str(SMALL), "-o", str(tmp_path / "c"), "--formats", "hex,xml"], "--formats"),
        (["vectors", str(tmp_path / "none.toml"), "-o", str(tmp_path / "d")], "SPEC"),
        (["vectors", str(SMALL), "-o", str(blocker / "sub")], "plainfile"),
        (["check", str(tmp_path)], "DIR"),
    ]
    for args, needle in cases:
        assert cli.main(args) == 2, args
        err = capsys.readouterr().err
        assert len(err.splitlines()) == 1 and needle in err, (args, err)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plainfile"]
    assert cli.main(["vectors", str(SMALL), "-o", str(tmp_path / "ok"), "--formats", "hex"]) == 0
    assert len(capsys.readouterr().out.splitlines()) == 1
    assert cli.main(["vectors", str(SMALL), "-o", str(tmp_path / "ok")]) == 2
    assert "--force" in capsys.readouterr().err
    assert cli.main(["vectors", str(SMALL), "-o", str(tmp_path / "ok"), "--force", "--seed", "9"]) == 0
    assert json.loads((tmp_path / "ok" / "manifest.json").read_text())["seed"] == 9


def _bare_spec(r: int, g: int, frame_length: int, **fixed):
    return spec_from_dict({"detector": {"kind": "ca", "ref_cells_per_side": r, "guard_cells_per_side": g,
                                        "alpha": 3.0},
                           "fixed": {"input_bits": 8, **fixed}, "stream": {"frame_length": frame_length}})


@pytest.mark.parametrize("frame_length", [3, 4, 5])
def test_issue15_default_targets_fit_the_shortest_frames(frame_length, tmp_path):
    """Issue 15: the default 4-cell target was refused for frame_length <= 3 (now cut at the frame
    end, docs/vectors.md); R = 1, G = 0 makes W = 3, the shortest frame the block spec accepts."""
    spec = _bare_spec(1, 0, frame_length)
    settings = vector_settings(spec)
    for t in settings.targets:
        assert 0 <= t.cell < frame_length and 1 <= t.extent <= frame_length - t.cell
    extended = [t for t in settings.targets if t.snr_db == 12.0]
    assert extended and extended[0].cell == frame_length // 4
    assert extended[0].extent == min(4, frame_length - frame_length // 4)
    write_vector_set(spec, tmp_path / "set", formats=["hex"])
    assert (tmp_path / "set" / "manifest.json").is_file()


@pytest.mark.parametrize("frame_length, want", [(2**23, 2**24), (2**23 + 1, 2**24), (2**24, 2**24), (1000, 2000)])
def test_issue15_default_random_length_max_keeps_its_own_limit(frame_length, want):
    """Issue 15: the default 2 * frame_length broke the 2^24 limit above frame_length 2^23
    (docs/vectors.md: the default is 2 * frame_length, at most 2^24)."""
    assert vector_settings(_bare_spec(4, 1, frame_length)).random_length_max == want


def test_issue15_manifest_side_sum_bits_is_the_width_used(tmp_path):
    """Issue 15: derived.side_sum_bits reported the minimum bitlen(R (2^W_in - 1)) = bitlen(4 * 255)
    = 10 even when fixed.sum_bits = 24 was given; the running sums are 24 bits wide
    (docs/bit-true.md section 3)."""
    spec = spec_from_dict({**_bare_spec(4, 1, 64, sum_bits=24).to_dict(), "vectors": {"scenario_frames": 1,
                                                                                     "random_frames": 1}})
    manifest = write_vector_set(spec, tmp_path / "set", formats=["hex"])
    assert manifest["derived"]["side_sum_bits"] == 24
    assert _bare_spec(4, 1, 64).derived()["side_sum_bits"] == 10  # 4 * 255 = 1020 < 2^10

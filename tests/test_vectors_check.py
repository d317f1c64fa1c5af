"""The checker catches every damaged bit and every edited manifest field.

Sources: FIPS 180-4 (SHA-256, through :mod:`hashlib`) for the resealed
manifests; ``docs/vectors.md`` section "manifest.json" for the seal recipe
(SHA-256 of the canonical JSON without ``manifest_sha256``); the bit-accurate
model (:mod:`refmodel.fixedpoint.pipeline_fast`) is what the expected words must match.
The set is the invented scenario of ``tests/data/vectors_small.toml``.
"""

from __future__ import annotations

import copy
import hashlib
import json
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from refmodel.block_spec import load_spec, spec_from_dict
from vectors.checker import check_vector_set
from vectors.vector_set import write_vector_set

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "tests" / "data" / "vectors_small.toml"
DATA_FILES = ["stimulus.hex", "stimulus.bin", "stimulus.csv", "expected.hex", "expected.bin", "expected.csv"]


@pytest.fixture(scope="module")
def pristine(tmp_path_factory):
    out = tmp_path_factory.mktemp("check") / "set"
    d = load_spec(SMALL).to_dict()
    d["vectors"].update(scenario_frames=3, random_frames=3)  # small: many copies get checked
    write_vector_set(spec_from_dict(d), out)
    return out


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    """Hex only, no corner cases: many manifests get checked against it."""
    out = tmp_path_factory.mktemp("check") / "tiny"
    d = load_spec(SMALL).to_dict()
    d["vectors"].update(scenario_frames=2, random_frames=2, include_corner_cases=False, formats=["hex"])
    write_vector_set(spec_from_dict(d), out)
    return out


def _copy(pristine: Path, tmp_path: Path) -> Path:
    dst = tmp_path / "copy"
    shutil.copytree(pristine, dst)
    return dst


def _reseal(m: dict) -> dict:
    """docs/vectors.md: manifest_sha256 = SHA-256 of the canonical JSON of every other field."""
    body = {k: v for k, v in m.items() if k != "manifest_sha256"}
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return {**body, "manifest_sha256": hashlib.sha256(text.encode()).hexdigest()}


def test_pristine_set_passes(pristine):
    r = check_vector_set(pristine)
    assert r.ok, r.summary()
    m = json.loads((pristine / "manifest.json").read_text())
    assert (r.frames, r.samples, r.files) == (m["totals"]["frames"], m["totals"]["samples"], 6)


@pytest.mark.parametrize("name", DATA_FILES)
def test_any_flipped_bit_is_found_where_it_is(pristine, tmp_path, name):
    rng = np.random.default_rng(sum(name.encode()))  # seeded per file
    data = (pristine / name).read_bytes()
    folder = _copy(pristine, tmp_path)
    for _ in range(6):
        pos, bit = int(rng.integers(len(data))), int(rng.integers(8))
        damaged = bytearray(data)
        damaged[pos] ^= 1 << bit
        (folder / name).write_bytes(bytes(damaged))
        r = check_vector_set(folder)
        assert not r.ok, (name, pos, bit)
        first = r.findings[0]
        assert first.file == name, (pos, bit, str(first))
        line = data[:pos].count(b"\n") + 1
        # A flip that changes no value (a hex digit's letter case) is caught by the hash alone.
        assert first.line in (None, line), (pos, bit, str(first))
        assert any(f.file == name and "SHA-256" in f.message for f in r.findings)
    (folder / name).write_bytes(data)
    assert check_vector_set(folder).ok


def _leaves(obj, path=()):
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _leaves(v, path + (k,))
    elif isinstance(obj, list) and obj:
        for i, v in enumerate(obj):
            yield from _leaves(v, path + (i,))
    else:
        yield path, obj


def _edited(value):
    if isinstance(value, bool):
        return not value
    if isinstance(value, int):
        return value + 1
    if isinstance(value, float):
        return value * 1.5 + 1.0
    if isinstance(value, str):
        return value + "x"
    if value is None:
        return 1
    return [0]  # an empty list


def test_any_edited_manifest_field_is_found(tiny, tmp_path):
    folder = _copy(tiny, tmp_path)
    original = json.loads((tiny / "manifest.json").read_text())
    leaves = list(_leaves(original))
    assert len(leaves) > 60
    for path, value in leaves:
        m = copy.deepcopy(original)
        node = m
        for k in path[:-1]:
            node = node[k]
        node[path[-1]] = _edited(value)
        (folder / "manifest.json").write_text(json.dumps(m, indent=2))
        assert not check_vector_set(folder).ok, path
    for key in original:  # removed fields too
        m = {k: v for k, v in original.items() if k != key}
        (folder / "manifest.json").write_text(json.dumps(m))
        assert not check_vector_set(folder).ok, key


def test_resealed_spec_edit_is_caught_by_the_model(pristine, tmp_path):
    """A consistent-looking manifest for another alpha: only the model comparison can tell."""
    folder = _copy(pristine, tmp_path)
    m = json.loads((folder / "manifest.json").read_text())
    m["spec"]["detector"]["alpha"] *= 1.25
    spec = spec_from_dict(m["spec"])
    m["derived"] = spec.derived()
    m["spec"] = spec.to_dict()
    # Written in the documented form (docs/vectors.md: indent 2, keys sorted, ASCII, final newline).
    (folder / "manifest.json").write_bytes((json.dumps(_reseal(m), indent=2, sort_keys=True) + "\n").encode())
    r = check_vector_set(folder)
    assert not r.ok
    assert r.findings[0].file == "expected.hex" and r.findings[0].field == "threshold", str(r.findings[0])
    assert r.findings[0].frame is not None and r.findings[0].line is not None


def test_truncated_and_extended_files_are_found(pristine, tmp_path):
    folder = _copy(pristine, tmp_path)
    data = (folder / "expected.hex").read_bytes()
    (folder / "expected.hex").write_bytes(data[: len(data) - 3])  # cut inside the last line
    assert not check_vector_set(folder).ok
    (folder / "expected.hex").write_bytes(data + data[-10:])
    assert not check_vector_set(folder).ok
    (folder / "expected.hex").write_bytes(data)
    (folder / "stimulus.csv").unlink()
    r = check_vector_set(folder)
    assert not r.ok and r.findings[0].file == "stimulus.csv"


def test_cli_exit_codes_and_one_line(pristine, tmp_path):
    folder = _copy(pristine, tmp_path)
    ok = subprocess.run([sys.executable, "-m", "cfarvec", "check", str(folder)], cwd=ROOT, capture_output=True,
                        text=True, timeout=300)
    assert ok.returncode == 0 and ok.stdout.startswith("OK") and len(ok.stdout.splitlines()) == 1, ok.stderr
    lines = (folder / "expected.hex").read_bytes().split(b"\n")
    lines[100] = b"%0*x" % (len(lines[100]), int(lines[100], 16) ^ 1)  # CUT field, line 101
    (folder / "expected.hex").write_bytes(b"\n".join(lines))
    from cfarvec import cli

    assert cli.main(["check", str(folder)]) == 1
    r = check_vector_set(folder)
    first = r.findings[0]
    assert (first.file, first.line, first.field) == ("expected.hex", 101, "cut")
    assert first.frame is not None and first.index is not None


def test_set_from_a_design_pfa_spec_checks(tmp_path):
    """A spec that gives design_pfa records both it and the derived alpha; the check still rebuilds it."""
    d = load_spec(SMALL).to_dict()
    del d["detector"]["alpha"]
    d["detector"]["design_pfa"] = 1e-4
    d["vectors"].update(scenario_frames=2, random_frames=1, include_corner_cases=False, formats=["hex"])
    write_vector_set(spec_from_dict(d), tmp_path / "set")
    r = check_vector_set(tmp_path / "set")
    assert r.ok, r.summary()


# --------------------------------------------------------------------------
# Issue 15 item 4: the check seals bytes, lists unexpected files, names the damaged file.
# --------------------------------------------------------------------------


@pytest.mark.parametrize("edit", [
    lambda t: t.replace(b"1e-06", b"1E-06", 1),  # the same number, another spelling (RFC 8259 sec. 6)
    lambda t: t.replace(b'\n  "', b'\n   "'),  # re-indented: whitespace between tokens (RFC 8259 sec. 2)
    lambda t: t.replace(b"\n", b"\r\n"),  # CRLF line ends
    lambda t: t.rstrip(b"\n"),  # no final newline
    lambda t: t.replace(b'"format": "cfarvec-vector-set"', b'"format": "cfarvec-vector-s\\u0065t"'),  # escape
], ids=["exponent-case", "indent", "crlf", "no-final-newline", "escaped-char"])
def test_issue15_same_meaning_manifest_edit_is_found(tmp_path, edit):
    """Issue 15: each edit leaves json.loads' result unchanged (checked below), so only the bytes
    can tell; the check must fail and blame manifest.json."""
    d = load_spec(SMALL).to_dict()
    del d["detector"]["alpha"]
    d["detector"]["design_pfa"] = 1e-6  # recorded as 1e-06 in the manifest
    d["vectors"].update(scenario_frames=1, random_frames=1, include_corner_cases=False, formats=["hex"])
    folder = tmp_path / "set"
    write_vector_set(spec_from_dict(d), folder)
    assert check_vector_set(folder).ok
    text = (folder / "manifest.json").read_bytes()
    assert b"1e-06" in text
    edited = edit(text)
    assert edited != text and json.loads(edited) == json.loads(text)
    (folder / "manifest.json").write_bytes(edited)
    r = check_vector_set(folder)
    assert not r.ok
    assert r.findings[0].file == "manifest.json", r.summary()


def test_issue15_stray_files_are_listed(tiny, tmp_path):
    """Issue 15: files the manifest does not list (hidden ones and folders too) are each reported."""
    folder = _copy(tiny, tmp_path)
    (folder / "notes.txt").write_text("left by hand")
    (folder / ".hidden").write_bytes(b"")
    (folder / "sub").mkdir()
    r = check_vector_set(folder)
    assert not r.ok
    stray = sorted(f.file for f in r.findings if "not listed" in f.message)
    assert stray == [".hidden", "notes.txt", "sub"], r.summary()
    assert len(r.findings) == 3


@pytest.mark.parametrize("damage", [
    lambda t: t + t.split(b"\n")[-2] + b"\n",  # the last line twice
    lambda t: t + b"000\n",  # one extra word
    lambda t: b"",  # emptied
    lambda t: t[: t.index(b"\n") + 1] + t,  # the first line twice
    lambda t: bytes([t[0] ^ 1]) + t[1:],  # one bit
], ids=["last-line-twice", "extra-word", "emptied", "first-line-twice", "flipped-bit"])
def test_issue15_damaged_stimulus_hex_is_named(tmp_path, damage):
    """Issue 15: with stimulus.hex damaged (its SHA-256 fails, stimulus.bin's passes) the first
    finding names stimulus.hex, not stimulus.bin or expected.hex."""
    d = load_spec(SMALL).to_dict()
    d["vectors"].update(scenario_frames=2, random_frames=2, formats=["hex", "bin", "csv"])
    folder = tmp_path / "set"
    write_vector_set(spec_from_dict(d), folder)
    path = folder / "stimulus.hex"
    path.write_bytes(damage(path.read_bytes()))
    r = check_vector_set(folder)
    assert not r.ok
    assert r.findings[0].file == "stimulus.hex", r.summary()
    assert any(f.file == "stimulus.hex" and "SHA-256" in f.message for f in r.findings)


def test_crlf_data_file_is_found_at_its_first_line(pristine, tmp_path):
    """A hex file with CRLF line ends is wrong from line 1 on (docs/vectors.md: LF-terminated
    fixed-width lines); the finding names that line, not the end of the file."""
    folder = _copy(pristine, tmp_path)
    path = folder / "stimulus.hex"
    path.write_bytes(path.read_bytes().replace(b"\n", b"\r\n"))
    first = check_vector_set(folder).findings[0]
    assert (first.file, first.line) == ("stimulus.hex", 1), str(first)

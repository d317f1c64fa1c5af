"""Property-based fuzzing of the command line: 0 tracebacks, 0 hangs (issue 15, item 3).

Hypothesis draws spec files (every field of every section replaced by values
of any TOML type: huge and negative integers, nan, inf, dates, times,
strings with control characters, nested arrays and tables; unknown keys and
sections; bytes that are not TOML at all), command-line flags (known options
with hostile values, unknown tokens) and output paths (empty, ``.``, ``..``,
``/``, control characters, files, symbolic links) for every command that
runs no simulator (``design``, ``vectors``, ``check``, ``testbench`` and the
option checks of ``study``), plus the refusal paths of ``testbench`` and
``cosim``. The rule checked is the project's own (README, "Bad input ends
with one line naming the field and the allowed values, and exit code 2"):

* ``cfarvec.cli.main`` returns 0, 1 (a check that disagrees) or 2, or
  argparse exits with 0 or 2; any other exception is a traceback;
* exit 2 prints exactly one line on stderr;
* nothing outside the run's own output folder changes: the user's files in
  the current folder and the spec survive, and no hidden ``.NAME.partial-*``
  or ``.NAME.old-*`` folder stays behind.

Commands run in this process through ``cfarvec.cli.main`` (fast); a few
subprocess runs check the same from outside. A hang guard (SIGALRM,
:data:`HANG_GUARD_S`, generous) turns a hang into a failure instead of a
stalled suite; nothing is timed. CI runs a small profile; ``CFARVEC_LONG=1``
runs a large one.
"""

from __future__ import annotations

import contextlib
import datetime as dt
import io
import json
import math
import os
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from cfarvec import cli

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "tests" / "data" / "vectors_small.toml"
BASE = tomllib.loads(SMALL.read_text())
LONG = os.environ.get("CFARVEC_LONG") == "1"
# A guard that only stops a hang; a run of these small specs takes well under a second.
HANG_GUARD_S = 300

FUZZ = settings(max_examples=2000 if LONG else 60, deadline=None, derandomize=not LONG,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                       HealthCheck.filter_too_much])
FEW = settings(FUZZ, max_examples=300 if LONG else 15)

SENTINEL = "the user's own notes\n"
# What a staged folder is called while it is written (refmodel.output_folder).
LEFTOVER = re.compile(r"\..+\.(partial|old)-[a-z0-9_]{8}")


# ---------------------------------------------------------------- TOML text of any value

def _toml_string(s: str) -> str:
    # JSON string escapes are TOML basic-string escapes; TOML also wants DEL escaped.
    return json.dumps(s, ensure_ascii=False).replace("\x7f", "\\u007f")


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf") if math.isinf(v) else repr(v)
    if isinstance(v, str):
        return _toml_string(v)
    if isinstance(v, (dt.datetime, dt.date, dt.time)):
        return v.isoformat()
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_toml_string(str(k))} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def to_toml(data: dict) -> str:
    lines = []
    for name, table in data.items():
        lines.append(f"[{_toml_string(name)}]")
        if isinstance(table, dict):
            lines += [f"{_toml_string(str(k))} = {_toml_value(v)}" for k, v in table.items()]
        else:  # a section that is not a table: write it as a key of an odd table
            lines[-1] = f"{_toml_string(name + '_x')} = {_toml_value(table)}"
    return "\n".join(lines) + "\n"


def test_toml_writer_round_trips():
    """The fuzzer's own TOML writer, checked against tomllib (the standard library's reader)."""
    data = {"a": {"s": "x\n\x1b\x7f\u202eé", "f": 1.5e-300, "i": -(2**63), "d": dt.date(1979, 5, 27),
                  "t": dt.time(7, 32), "l": [[1], ["a"]], "b": True, "tb": {"k": 1}}}
    assert tomllib.loads(to_toml(data)) == data


# ---------------------------------------------------------------- strategies

names = st.text(st.characters(codec="utf-8", exclude_categories=("Cs",)), min_size=0, max_size=12)
scalars = st.one_of(
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.integers(min_value=-5, max_value=70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -0.0, 1e308, 5e-324, 1e-300, 0.5, 1.0, 4096.0, 1e6]),
    st.booleans(),
    names,
    st.sampled_from(["ca", "go", "so", "os", "skip", "zero-pad", "one-sided", "circular", ">", ">=", "floor",
                     "half-up", "half-even", "saturate", "wrap", "hex", "bin", "csv", "1:4", "8:16:2", "", "_a"]),
    st.dates(), st.times(), st.datetimes(timezones=st.just(dt.timezone.utc)),
)
values = st.recursive(scalars, lambda inner: st.one_of(st.lists(inner, max_size=4),
                                                       st.dictionaries(names, inner, max_size=3)), max_leaves=8)

FIELDS = [(s, k) for s, table in BASE.items() for k in table] + [
    ("detector", "rank"), ("detector", "design_pfa"), ("fixed", "sum_bits"), ("fixed", "threshold_bits"),
    ("fixed", "alpha_csd_digits"), ("fixed", "truncate_partials"), ("fixed", "mean_by_shift"),
    ("fixed", "overflow"), ("vectors", "targets"), ("vectors", "include_corner_cases"),
    ("vectors", "clutter_start_cell"), ("vectors", "clutter_to_noise_db"), ("vectors", "chunk_samples"),
    ("ports", "module"), ("ports", "clock"), ("ports", "in_data"), ("ports", "out_fields"),
    ("ports", "parameters"), ("ports", "reset_active"), ("ports", "out_last"), ("study", "input_bits"),
    ("study", "mc_trials"), ("study", "rounding"), ("study", "snr_db"), ("study", "pd"),
]


@st.composite
def spec_dicts(draw):
    """The small valid spec with one to three fields replaced (or removed, or unknown ones added)."""
    data = json.loads(json.dumps(BASE))  # a deep copy (the base has no dates)
    for _ in range(draw(st.integers(1, 3))):
        section, key = draw(st.one_of(st.sampled_from(FIELDS), st.tuples(st.sampled_from(list(BASE) + ["ports",
                                      "study", "extra"]), names)))
        action = draw(st.sampled_from(["set", "set", "set", "drop", "section"]))
        if action == "drop":
            table = data.get(section)
            if isinstance(table, dict):  # an earlier draw may have replaced the section by a scalar
                table.pop(key, None)
        elif action == "section":
            data[section] = draw(values)
        else:
            table = data.setdefault(section, {})
            if isinstance(table, dict):
                table[key] = draw(values)
    # Keep the runs small so that a valid draw is fast (sizes have their own tests).
    vec = data.get("vectors")
    if isinstance(vec, dict):
        for key in ("scenario_frames", "random_frames"):
            if isinstance(vec.get(key), int) and not isinstance(vec.get(key), bool) and vec[key] > 40:
                vec[key] = 40
    stream = data.get("stream")
    if isinstance(stream, dict) and isinstance(stream.get("frame_length"), int) and stream["frame_length"] > 4096:
        stream["frame_length"] = 4096
    return data


option_values = st.one_of(
    names,
    st.integers(-(10**13), 10**13).map(str),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.sampled_from(["", " ", "-", "--", "0", "1", "-1", "1e308", "1e-320", "nan", "inf", "1_000", "0x10",
                     "1,2", "1:4", "4:1", "1:4:0", ",", "hex,bin", "hex,hex", "0,1", "2", "1e-6", "ca", "os",
                     "bulk", "verilog", "independent", "\x00", "a\nb", "spec.toml", "notes.txt"]),
)

DESIGN_OPTIONS = ["--detector", "--ref-cells-total", "--ref-cells", "--rank", "--pfa", "--alpha", "--snr-db",
                  "--pd", "--swerling", "--spec"]
VECTORS_OPTIONS = ["--seed", "--formats", "-o", "--output"]
BENCH_OPTIONS = ["--rtl", "--top", "--samples", "--seed", "--gaps", "--stalls"]
COSIM_BAD = [["--mode", "nope"], ["--sink", "nope"], ["--gaps", "96"], ["--stalls", "-1"], ["--samples", "0"],
             ["--gaps", "x"], ["--keep", ""], ["--keep", "."], ["--keep", "/"], ["--top", "1bad"],
             ["--top", "module"], ["--rtl", "/nonexistent.v"], ["--seed", "-1"]]


@st.composite
def argv_for(draw, options, flags=()):
    argv = []
    for opt in draw(st.lists(st.sampled_from(options), max_size=6)):
        argv += [opt, draw(option_values)]
    argv += draw(st.lists(st.sampled_from(list(flags) + ["--json", "--force", "--bogus", "-x", "extra"]),
                          max_size=2))
    return argv


paths = st.one_of(
    st.sampled_from(["", ".", "./", "..", "../..", "/", "~", " ", "out", "out/", "sub/deep/out", "notes.txt",
                     "spec.toml", "notes.txt/inside", "link", "link/inside", "./out/../..", ".out.partial-x"]),
    names.filter(lambda s: "\x00" not in s),
)


# ---------------------------------------------------------------- running one command safely

class _Hang(Exception):
    pass


def _alarm(signum, frame):
    raise _Hang(f"no answer within {HANG_GUARD_S} s")


@contextlib.contextmanager
def _workspace():
    """A fresh current folder holding the spec, a file of the user's own and a symlink to the folder."""
    old = os.getcwd()
    with tempfile.TemporaryDirectory(prefix="cfarvec-fuzz-") as d:
        work = Path(d) / "work"
        work.mkdir()
        (work / "notes.txt").write_text(SENTINEL)
        (work / "link").symlink_to(work)
        os.chdir(work)
        try:
            yield work
        finally:
            os.chdir(old)


def run_cli(argv: list[str]) -> tuple[int, str, str]:
    """``cli.main(argv)`` in this process: (exit code, stdout, stderr); any other exception propagates."""
    out, err = io.StringIO(), io.StringIO()
    previous = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(HANG_GUARD_S)
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = cli.main(argv)
            except SystemExit as exc:  # argparse: --help or a usage error
                code = exc.code if isinstance(exc.code, int) else 2
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)
    return code, out.getvalue(), err.getvalue()


def check_outcome(argv, code, out, err, work: Path, allowed=(0, 2)) -> None:
    assert code in allowed, (argv, code, out, err)
    if code == 2:
        assert len(err.splitlines()) == 1 and err.endswith("\n"), (argv, err)
        assert "Traceback" not in err
    assert (work / "notes.txt").read_text() == SENTINEL, argv
    leftovers = [p for p in work.rglob("*") if LEFTOVER.fullmatch(p.name)]
    assert not leftovers, (argv, leftovers)


# ---------------------------------------------------------------- spec fields

@FUZZ
@given(data=spec_dicts(), command=st.sampled_from(["design", "vectors", "testbench"]))
def test_spec_fields(data, command):
    with _workspace() as work:
        (work / "spec.toml").write_text(to_toml(data), encoding="utf-8")
        argv = {"design": ["design", "--spec", "spec.toml"], "vectors": ["vectors", "spec.toml", "-o", "out"],
                "testbench": ["testbench", "spec.toml", "-o", "out", "--samples", "200"]}[command]
        code, out, err = run_cli(argv)
        check_outcome(argv, code, out, err, work)
        if code == 0 and command == "vectors":
            # What was written checks clean: the set agrees with its own manifest and the model.
            code, out, err = run_cli(["check", "out"])
            assert code == 0, out


@FEW
@given(blob=st.binary(max_size=400), command=st.sampled_from(["design", "vectors", "check"]))
def test_spec_bytes_that_are_not_toml(blob, command):
    with _workspace() as work:
        (work / "spec.toml").write_bytes(blob)
        argv = {"design": ["design", "--spec", "spec.toml"], "vectors": ["vectors", "spec.toml", "-o", "out"],
                "check": ["check", "."]}[command]
        if command == "check":
            (work / "manifest.json").write_bytes(blob)
        code, out, err = run_cli(argv)
        check_outcome(argv, code, out, err, work, allowed=(0, 1, 2) if command == "check" else (0, 2))


# ---------------------------------------------------------------- flags

@FUZZ
@given(argv=argv_for(DESIGN_OPTIONS))
def test_design_flags(argv):
    with _workspace() as work:
        shutil.copy(SMALL, work / "spec.toml")
        argv = ["design", *argv]
        code, out, err = run_cli(argv)
        check_outcome(argv, code, out, err, work)
        if code == 0 and "--json" in argv:
            json.loads(out)


@FUZZ
@given(argv=argv_for(VECTORS_OPTIONS), spec=st.sampled_from(["spec.toml", "", "missing.toml", ".", "notes.txt"]))
def test_vectors_flags(argv, spec):
    with _workspace() as work:
        shutil.copy(SMALL, work / "spec.toml")
        argv = ["vectors", spec, *argv]
        code, out, err = run_cli(argv)
        check_outcome(argv, code, out, err, work)


@FEW
@given(argv=argv_for(BENCH_OPTIONS + ["-o"]))
def test_testbench_flags(argv):
    with _workspace() as work:
        shutil.copy(SMALL, work / "spec.toml")
        argv = ["testbench", "spec.toml", *argv]
        code, out, err = run_cli(argv)
        check_outcome(argv, code, out, err, work)


@FEW
@given(bad=st.lists(st.sampled_from(COSIM_BAD), min_size=1, max_size=3), argv=argv_for(BENCH_OPTIONS))
def test_cosim_refusals(bad, argv):
    """Every draw holds at least one bad option, so cosim must refuse it before any simulator starts."""
    with _workspace() as work:
        shutil.copy(SMALL, work / "spec.toml")
        argv = ["cosim", "spec.toml", *argv, *[x for pair in bad for x in pair]]
        code, out, err = run_cli(argv)
        assert code == 2, (argv, code, out, err)
        check_outcome(argv, code, out, err, work)


@FEW
@given(argv=argv_for(["--input-bits", "--alpha-frac-bits", "--alpha-csd-digits", "--threshold-frac-bits",
                      "--rounding", "--noise-lsb", "--snr-db", "--pd", "--swerling", "--mc-trials", "--confidence",
                      "--seed", "--max-loss-db", "--pfa-tolerance", "--workers", "--noise-scaling", "-o"]),
       data=spec_dicts())
def test_study_option_checks(argv, data, monkeypatch_module):
    """The study's option and [study] checks (the sweep itself is stood in for: it is minutes, not a check)."""
    with _workspace() as work:
        (work / "spec.toml").write_text(to_toml(data), encoding="utf-8")
        argv = ["study", "spec.toml", "-o", "report", "--no-progress", *argv]
        code, out, err = run_cli(argv)
        assert code in (0, 2, 3), (argv, code, out, err)  # 3: validation passed, the stand-in sweep was reached
        check_outcome(argv, code if code != 3 else 0, out, err, work)


@pytest.fixture(scope="module")
def monkeypatch_module():
    """Stand in for the study's sweep: validation runs for real, the sweep ends the command with exit 3."""
    from refmodel.study import quant_study

    real = quant_study.run_study

    def stand_in(*args, **kwargs):
        raise SystemExit(3)

    quant_study.run_study = stand_in
    yield
    quant_study.run_study = real


# ---------------------------------------------------------------- paths

@FUZZ
@given(target=paths, force=st.booleans(), command=st.sampled_from(["vectors", "testbench"]))
def test_output_paths(target, force, command):
    with _workspace() as work:
        shutil.copy(SMALL, work / "spec.toml")
        (work / "out").mkdir()
        (work / "out" / "previous.txt").write_text("previous\n")
        before = sorted(p.name for p in work.iterdir())
        argv = [command, "spec.toml", "-o", target] + (["--force"] if force else [])
        if command == "testbench":
            argv += ["--samples", "100"]
        code, out, err = run_cli(argv)
        check_outcome(argv, code, out, err, work)
        assert (work / "spec.toml").read_bytes() == SMALL.read_bytes()
        if code != 0:
            assert sorted(p.name for p in work.iterdir()) == before, argv
            assert (work / "out" / "previous.txt").read_text() == "previous\n"


@FEW
@given(target=paths)
def test_check_paths(target):
    with _workspace() as work:
        code, out, err = run_cli(["check", target])
        check_outcome(["check", target], code, out, err, work, allowed=(1, 2))


# ---------------------------------------------------------------- a few from outside

@pytest.mark.parametrize("argv", [
    ["design", "--ref-cells-total", "nan", "--pfa", "1e-6"],
    ["design", "--ref-cells-total", "1", "--pfa", "5e-324"],
    ["vectors", "spec.toml", "-o", "", "--force"],
    ["vectors", "spec.toml", "-o", "a\x1bb", "--formats", "hex,\x07"],
    ["check", "notes.txt"],
    ["cosim", "spec.toml", "--keep", ".", "--force"],
])
def test_subprocess_runs_end_in_one_line(tmp_path, argv):
    shutil.copy(SMALL, tmp_path / "spec.toml")
    (tmp_path / "notes.txt").write_text(SENTINEL)
    r = subprocess.run([sys.executable, "-m", "cfarvec", *argv], cwd=tmp_path, capture_output=True, text=True,
                       timeout=HANG_GUARD_S, stdin=subprocess.DEVNULL, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert r.returncode == 2 and len(r.stderr.splitlines()) == 1 and "Traceback" not in r.stderr, r.stderr
    assert (tmp_path / "notes.txt").read_text() == SENTINEL

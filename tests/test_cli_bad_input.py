"""Bad input gets one line and exit code 2, never a traceback or a hang (issue 15, item 3).

Each case below is a repro from the issue: before the fix it ended in a
traceback (``UnicodeDecodeError``, ``OverflowError``, ``RecursionError``), or
hung (a FIFO), or would have written for hours (absurd sizes). The rule
checked is the project's own (README, "Bad input ends with one line naming
the field and the allowed values, and exit code 2"). Processes that could
hang run with a generous ``timeout`` that only stops a hang; nothing is timed.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from cfarvec import cli

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "tests" / "data" / "vectors_small.toml"
HARBOUR = ROOT / "examples" / "harbour_ca.toml"
# A generous bound that only stops a hang (a hung child would otherwise stall the suite).
HANG_GUARD_S = 120


def _one_line_error(capsys, code, field=None):
    cap = capsys.readouterr()
    assert code == 2, cap
    assert len(cap.err.splitlines()) == 1 and cap.err.endswith("\n"), cap.err
    assert "Traceback" not in cap.err
    if field is not None:
        assert field in cap.err, cap.err
    return cap.err


def _spec(tmp_path: Path, text: str, name: str = "spec.toml") -> str:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return str(p)


def _with_section(extra: str) -> str:
    """The small spec without its [vectors] section, plus ``extra``."""
    head = SMALL.read_text().split("[vectors]")[0]
    return head + extra


# ---------------------------------------------------------------- the spec file itself

def test_non_utf8_spec(tmp_path, capsys):
    p = tmp_path / "latin1.toml"
    p.write_bytes(SMALL.read_bytes().replace(b"Larkspur", b"L\xe4rkspur"))
    _one_line_error(capsys, cli.main(["vectors", str(p), "-o", str(tmp_path / "o")]), "SPEC")
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("command", [["design", "--spec"], ["vectors"], ["synth"], ["testbench"]])
def test_spec_nested_100k_deep(tmp_path, capsys, command):
    p = _spec(tmp_path, "[detector]\nref_cells_per_side = " + "[" * 100_000 + "]" * 100_000 + "\n")
    args = [*command, p] + (["-o", str(tmp_path / "o")] if command[0] in ("vectors", "testbench") else [])
    _one_line_error(capsys, cli.main(args), "SPEC")


def test_spec_value_nested_as_deep_as_the_parser_goes(tmp_path, capsys):
    # Deep enough to parse, then echoed in the error: still one line.
    depth = 900
    p = _spec(tmp_path, SMALL.read_text().replace("alpha = 5.3", "alpha = " + "[" * depth + "]" * depth))
    _one_line_error(capsys, cli.main(["design", "--spec", p]), "SPEC")


def test_fifo_and_devices_as_spec_do_not_hang(tmp_path):
    fifo = tmp_path / "spec.fifo"
    os.mkfifo(fifo)
    for spec in (str(fifo), "/dev/zero", "/dev/null", str(tmp_path)):
        r = subprocess.run([sys.executable, "-m", "cfarvec", "design", "--spec", spec], cwd=ROOT,
                           capture_output=True, text=True, timeout=HANG_GUARD_S, stdin=subprocess.DEVNULL)
        assert r.returncode == 2 and len(r.stderr.splitlines()) == 1 and "SPEC" in r.stderr, r.stderr


# ---------------------------------------------------------------- values

def test_alpha_1e308(tmp_path, capsys):
    p = _spec(tmp_path, SMALL.read_text().replace("alpha = 5.3", "alpha = 1e308"))
    for args in (["design", "--spec", p], ["vectors", p, "-o", str(tmp_path / "o")]):
        _one_line_error(capsys, cli.main(args), "detector.alpha")


@pytest.mark.parametrize("section,key", [
    ("study", "max_loss_db"), ("study", "input_bits"), ("study", "snr_db"), ("study", "pd"),
    ("ports", "module"), ("ports", "reset_active"), ("ports", "clock"),
    ("vectors", "noise_level_lsb"), ("vectors", "seed"), ("vectors", "formats"),
])
@pytest.mark.parametrize("value", ["1979-05-27", "1979-05-27T07:32:00Z", "07:32:00", "nan", "inf", "-inf", "[nan]"])
def test_toml_dates_nan_inf(tmp_path, capsys, section, key, value):
    p = _spec(tmp_path, _with_section(f"[{section}]\n{key} = {value}\n"))
    command = {"study": ["study", p, "-o", str(tmp_path / "o"), "--mc-trials", "0", "--no-progress"],
               "ports": ["testbench", p, "-o", str(tmp_path / "o")],
               "vectors": ["vectors", p, "-o", str(tmp_path / "o")]}[section]
    _one_line_error(capsys, cli.main(command), f"{section}.{key}")
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("extra,field", [
    ("[ports]\nmodule = 2000-01-01\n", "ports.module"),
    ("[ports.parameters]\nDEPTH = [1, 07:32:00]\n", "ports.parameters.DEPTH[1]"),
    ("[notes]\nwhen = 1979-05-27T07:32:00Z\n", "notes.when"),
])
@pytest.mark.parametrize("command", ["vectors", "design"])
def test_toml_dates_in_a_section_the_command_does_not_read(tmp_path, capsys, extra, field, command):
    # Found by the fuzz suite: `vectors` does not read [ports], yet copied its date into the manifest (a
    # traceback from the JSON writer). TOML dates and times: TOML v1.0.0, "Offset Date-Time" .. "Local Time".
    p = _spec(tmp_path, SMALL.read_text() + extra)
    argv = ["vectors", p, "-o", str(tmp_path / "o")] if command == "vectors" else ["design", "--spec", p]
    _one_line_error(capsys, cli.main(argv), field)
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("key,value", [("alpha", "nan"), ("alpha", "inf"), ("alpha", "1979-05-27"),
                                       ("ref_cells_per_side", "inf"), ("edge", "07:32:00")])
def test_toml_dates_nan_inf_in_the_detector(tmp_path, capsys, key, value):
    text = SMALL.read_text()
    line = next(ln for ln in text.splitlines() if ln.startswith(f"{key} ="))
    p = _spec(tmp_path, text.replace(line, f"{key} = {value}"))
    _one_line_error(capsys, cli.main(["design", "--spec", p]), f"detector.{key}")


# ---------------------------------------------------------------- absurd sizes

@pytest.mark.parametrize("key", ["random_frames", "scenario_frames"])
def test_huge_frame_counts_are_refused_before_writing(tmp_path, capsys, key):
    p = _spec(tmp_path, SMALL.read_text().replace(f"{key} = 12", f"{key} = 1_000_000_000_000"))
    err = _one_line_error(capsys, cli.main(["vectors", p, "-o", str(tmp_path / "o")]), "--output")
    assert "free" in err
    assert not (tmp_path / "o").exists() and not list(tmp_path.glob(".o.*"))


def test_samples_10_to_the_12_is_refused_before_writing(tmp_path, capsys):
    err = _one_line_error(capsys, cli.main(["testbench", str(SMALL), "-o", str(tmp_path / "tb"),
                                            "--samples", str(10**12)]))
    assert "free" in err
    assert not (tmp_path / "tb").exists() and not list(tmp_path.glob(".tb.*"))


# ---------------------------------------------------------------- the set given to check

def _small_set(tmp_path: Path) -> Path:
    assert cli.main(["vectors", str(SMALL), "-o", str(tmp_path / "set")]) == 0
    return tmp_path / "set"


def test_manifest_nested_100k_deep(tmp_path, capsys):
    folder = _small_set(tmp_path)
    capsys.readouterr()
    (folder / "manifest.json").write_text("[" * 100_000 + "]" * 100_000)
    assert cli.main(["check", str(folder)]) == 1  # a damaged set: one MISMATCH line, exit 1 (docs/vectors.md)
    cap = capsys.readouterr()
    assert cap.out.startswith("MISMATCH") and len(cap.out.splitlines()) == 1 and cap.err == "", cap


def test_fifo_in_place_of_a_data_file_does_not_hang(tmp_path):
    folder = _small_set(tmp_path)
    (folder / "stimulus.hex").unlink()
    os.mkfifo(folder / "stimulus.hex")
    r = subprocess.run([sys.executable, "-m", "cfarvec", "check", str(folder)], cwd=ROOT, capture_output=True,
                       text=True, timeout=HANG_GUARD_S, stdin=subprocess.DEVNULL)
    assert r.returncode == 1 and r.stdout.startswith("MISMATCH") and "stimulus.hex" in r.stdout, r
    assert "FIFO" in r.stdout and r.stderr == ""


# ---------------------------------------------------------------- errors are always one line

def test_control_characters_in_echoed_names_are_escaped(tmp_path, capsys):
    name = "bad\nname\x1b[2J\u202e.toml"
    p = tmp_path / name
    p.write_text("[detector\n")
    err = _one_line_error(capsys, cli.main(["design", "--spec", str(p)]), "SPEC")
    assert "\x1b" not in err and "\u202e" not in err and "\\x1b" in err and "\\u202e" in err
    q = _spec(tmp_path, SMALL.read_text().replace("[detector]", '[detector]\n"x\\ny\\u001b" = 1'))
    err = _one_line_error(capsys, cli.main(["design", "--spec", q]), "detector.x")
    assert "\x1b" not in err
    err = _one_line_error(capsys, _argparse_exit(["design", "--detector", "c\na\x07"]), "--detector")
    assert "\x07" not in err


def _argparse_exit(argv):
    try:
        return cli.main(argv)
    except SystemExit as exc:
        return exc.code


def test_one_line_keeps_printable_text_and_non_ascii():
    assert cli.one_line("Kestrel Quay, α = 4.2, é") == "Kestrel Quay, α = 4.2, é"
    assert cli.one_line("a\nb\tc\rd\x00\x7f\u2028") == "a\\nb\\tc\\rd\\x00\\x7f\\u2028"
    long = "x" * 5000 + "allowed: the end"
    short = cli.one_line(long)
    assert len(short) <= cli.MAX_ERROR_CHARS and short.endswith("allowed: the end")


# ---------------------------------------------------------------- a broken pipe is not an error

@pytest.mark.parametrize("args", [
    ["design", "--ref-cells-total", "32", "--pfa", "1e-6"],
    ["design", "--ref-cells-total", "32", "--pfa", "1e-6", "--json"],
    ["check", "SET", "--json"],
])
def test_no_broken_pipe_message(tmp_path, args):
    if "SET" in args:
        args = [str(_small_set(tmp_path)) if a == "SET" else a for a in args]
    read_end, write_end = os.pipe()
    os.close(read_end)  # the reader has gone, as `| head` does after its lines
    try:
        r = subprocess.run([sys.executable, "-m", "cfarvec", *args], cwd=ROOT, stdout=write_end,
                           stderr=subprocess.PIPE, text=True, timeout=HANG_GUARD_S)
    finally:
        os.close(write_end)
    assert r.stderr == "" and r.returncode == 141, r.stderr


def test_head_reads_the_first_line(tmp_path):
    if shutil.which("head") is None:
        pytest.skip("no head")
    folder = _small_set(tmp_path)
    r = subprocess.run(f"{sys.executable} -m cfarvec vectors {SMALL} -o {tmp_path / 'j'} --json | head -c 20; "
                       f"{sys.executable} -m cfarvec check {folder} --all | head -n 1",
                       shell=True, cwd=ROOT, capture_output=True, text=True, timeout=HANG_GUARD_S)
    assert r.stderr == "" and "Broken pipe" not in r.stdout, r
    assert json.loads((tmp_path / "j" / "manifest.json").read_text())["totals"]["samples"] > 0

"""GHDL, the VHDL simulator of the VHDL benches: finding it, analysing sources, starting a design.

Every VHDL bench file and the user's entity are analysed as VHDL-2008
(``--std=08``) into a work library kept in the build folder
(``--workdir``); the design is then elaborated and run in one step
(``ghdl -r``; the mcode back end of the distribution package compiles in
memory). The cocotb runner of ``cocotb_tools`` does the same for the cocotb
benches (``build_args`` and ``test_args`` carry ``--std=08``).

Notes
-----
GHDL 2.0 (distribution package ``ghdl``, mcode back end) works with cocotb
2.1 (measured on this project's machines, December 2026). NVC, the other
open-source VHDL simulator cocotb drives, has no package in the
distribution release these machines run (Debian 12), so it is not offered.
GHDL's messages read ``file:line:column: text``; analysis errors carry no
"error" word, so :func:`first_error` looks for that form.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path
from typing import Mapping, Sequence

from refmodel.errors import SpecError

#: The VHDL standard of every analysis and run.
STD = "--std=08"
#: Run options: no numeric_std warnings at time 0 (metavalues before the first clock edge).
RUN_FLAGS = ("--ieee-asserts=disable-at-0",)
LABEL = "GHDL"
_LOCATED = re.compile(r"^(?P<file>[^:\s][^:]*):(?P<line>\d+):(?P<col>\d+):(?P<text>.*)$")
_RUN_ERROR = re.compile(r"(?i)\berror\b|bound check failure|assertion|failure")


def ghdl_tool() -> str:
    """The path of ``ghdl``.

    Raises
    ------
    SpecError
        Field ``"simulator"`` when it is not on ``PATH``.
    """
    path = shutil.which("ghdl")
    if path is None:
        raise SpecError("simulator", "ghdl not found on PATH",
                        "GHDL 2 or later installed (distribution package ghdl; `make tools`)")
    return path


def located_errors(text: str) -> list[tuple[str, int, str]]:
    """``(file, line, message)`` of every located message of GHDL that is not a warning or a note."""
    out = []
    for raw in text.splitlines():
        m = _LOCATED.match(raw.strip())
        if m and not re.match(r"\s*(warning|note)\b", m.group("text")) and "(report note)" not in raw:
            out.append((m.group("file"), int(m.group("line")), m.group("text").strip()))
    return out


def first_error(text: str) -> str:
    """The first error GHDL printed: a located message, else the first line that reads as an error."""
    for file, line, message in located_errors(text):
        return f"{Path(file).name}:{line}: {message}"
    for raw in text.splitlines():
        if _RUN_ERROR.search(raw):
            return raw.strip()
    lines = [ln.strip() for ln in text.splitlines() if ln.strip()]
    return lines[-1] if lines else "no output"


def analyse(sources: Sequence[str], top: str, *, cwd: Path, workdir: str) -> subprocess.CompletedProcess:
    """Import ``sources`` into the work library and analyse what ``top`` needs (``ghdl -i``, ``ghdl -m``).

    Parameters
    ----------
    sources : sequence of str
        Paths relative to ``cwd`` (or absolute).
    top : str
        The design unit to make.
    cwd : pathlib.Path
        Where GHDL runs (and where :func:`run` must run too: the library
        records the source paths as given).
    workdir : str
        The library folder, relative to ``cwd``.

    Returns
    -------
    subprocess.CompletedProcess
        Of the last command run (stdout and stderr of both in ``stdout``).
    """
    ghdl = ghdl_tool()
    (cwd / workdir).mkdir(parents=True, exist_ok=True)
    log = ""
    proc = None
    for cmd in ([ghdl, "-i", STD, f"--workdir={workdir}", *sources],
                [ghdl, "-m", STD, f"--workdir={workdir}", top]):
        proc = subprocess.run(cmd, capture_output=True, text=True, cwd=cwd, errors="replace")
        log += " ".join(cmd) + "\n" + proc.stdout + proc.stderr
        if proc.returncode != 0:
            break
    assert proc is not None
    return subprocess.CompletedProcess(proc.args, proc.returncode, log, "")


def run_command(top: str, *, workdir: str, generics: Mapping[str, object] = (), waves: str | None = None,
                extra: Sequence[str] = ()) -> list[str]:
    """The command that elaborates and runs ``top`` (``ghdl -r``), with generics set by ``-g``."""
    cmd = [ghdl_tool(), "-r", STD, f"--workdir={workdir}", top, *RUN_FLAGS, *extra]
    cmd += [f"-g{k}={v}" for k, v in dict(generics).items()]
    if waves:
        cmd.append(f"--wave={waves}")
    return cmd


def relative(path: Path, start: Path) -> str:
    """``path`` relative to ``start`` (GHDL is handed only relative paths)."""
    return os.path.relpath(path, start)

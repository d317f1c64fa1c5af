"""Builds shared between runs: one build folder per simulator, design and parameter set.

A regression runs every seed (and pause pattern) of a parameter set on the
same simulator build: the seed, the gap and stall patterns, the vector
files and the word count reach the benches at run time (``cfarvec_run.json``,
plusargs, pattern files), so nothing of a seed is compiled in.
:func:`shared_build` finds or makes the build folder of a design under a
root folder (:mod:`hdl_tb.regression` uses ``<output>/builds``) and appends
one line to ``builds.log`` there for every build it makes.

The design is named by a hash of the toplevel, the simulator, the
parameters (all but ``MAX_WORDS``), the waveform flag and the bytes of every
source file, so the copies in each run's folder share one build and an
edited RTL file gets a new one. ``MAX_WORDS``, the depth of the benches'
memories, only has to hold the words of a run's vector files (Verilator
refuses a file longer than the memory, even when told to read fewer words):
a build is made with room for a quarter more words than the run that made
it needs (rounded up to a power of two) and reused by every run that fits,
so the vector sets of other seeds, a little longer or shorter, fit too; a
longer run gets a deeper build of its own (a new folder, so a build never
changes under a run that uses it).

Notes
-----
Runs in parallel worker processes wait for each other on a lock file per
design (``fcntl.flock``, POSIX), so each design is built by one of them.
"""

from __future__ import annotations

import contextlib
import fcntl
import hashlib
import json
import os
import shutil
from pathlib import Path
from typing import Callable, Mapping, Sequence

#: One JSON line per build made under a root folder.
BUILD_LOG = "builds.log"
#: Written into a build folder once its build succeeded.
STAMP_FILE = "cfarvec_build.json"


def design_key(folder: Path, *, toplevel: str, sources: Sequence[str], parameters: Mapping[str, int], waves: bool,
               simulator: str) -> str:
    """The hash naming a design: toplevel, simulator, parameters but ``MAX_WORDS``, waves, source bytes.

    ``sources`` are relative to ``folder`` (or absolute: the user's RTL where it is).
    """
    h = hashlib.sha256()
    params = {k: v for k, v in parameters.items() if k != "MAX_WORDS"}
    h.update(json.dumps([toplevel, simulator, params, bool(waves), list(sources)], sort_keys=True).encode())
    for s in sources:
        h.update(b"\0" + hashlib.sha256((Path(folder) / s).read_bytes()).digest())
    return h.hexdigest()[:16]


def memory_depth(words: int) -> int:
    """``MAX_WORDS`` of a new build for a run of ``words``: a quarter more, rounded up to a power of two."""
    need = max(16, int(words) + int(words) // 4)
    return 1 << (need - 1).bit_length()


def shared_build(root: Path, name: str, words: int, build: Callable[[Path, int], None]) -> tuple[Path, int, bool]:
    """The build folder of design ``name`` under ``root`` whose memories hold ``words`` words; build it if none.

    Parameters
    ----------
    root : pathlib.Path
        Holds the build folders, their lock files and ``builds.log``.
    name : str
        ``<label>-<design_key>``: one design (simulator, toplevel, parameters, sources).
    words : int
        Words the build's memories must hold (those of the run's vector files).
    build : callable
        ``build(folder, max_words)`` builds into ``folder`` (created empty) or raises.

    Returns
    -------
    (pathlib.Path, int, bool)
        The build folder, its ``MAX_WORDS``, and whether this call built it.
    """
    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    with open(root / f"{name}.lock", "a") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        built = []
        for stamp in root.glob(f"{name}-w*/{STAMP_FILE}"):
            with contextlib.suppress(OSError, ValueError, KeyError):
                built.append((int(json.loads(stamp.read_text(encoding="utf-8"))["max_words"]), stamp.parent))
        fitting = sorted(b for b in built if b[0] >= words)
        if fitting:
            return fitting[0][1], fitting[0][0], False
        depth = memory_depth(words)
        where = root / f"{name}-w{depth}"
        shutil.rmtree(where, ignore_errors=True)  # what a failed or killed build left
        where.mkdir()
        build(where, depth)
        record = {"build": where.name, "max_words": depth, "words": int(words), "pid": os.getpid()}
        (where / STAMP_FILE).write_text(json.dumps(record) + "\n", encoding="utf-8")
        with open(root / BUILD_LOG, "a", encoding="utf-8") as log:
            log.write(json.dumps(record) + "\n")
        return where, depth, True

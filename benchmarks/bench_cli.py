"""Start-up of the command line, as ratios measured in the same run.

Prints one JSON line per figure (``make bench``):

* ``cfarvec --help`` / ``python -c pass`` (target <= 3: no command module, numpy or scipy imported);
* ``cfarvec design --detector ca --ref-cells-total 32 --pfa 1e-6`` / ``python -c pass`` (target <= 15);
* the same design command / the same command run from a copy of the tree at commit ``OLD_COMMIT``, the
  last one whose command line imported every command module, and through them scipy.stats,
  scipy.integrate and scipy.optimize, at start (issue 15's "today's import path"; target <= 0.6).
  The copy is written with ``git archive`` into a temporary folder that goes first on ``PYTHONPATH``
  (that tree's option was still called ``--ref-cells``); without git or the commit the figure is
  skipped with a note on stderr.

Every child runs with Python's default bytecode cache (``PYTHONDONTWRITEBYTECODE`` removed from its
environment), as an installed package does, and one untimed round writes the caches first. Each
figure is the ratio of the medians over ``RUNS`` rounds; all commands of a round run one after the
other, so a load change on the machine hits them alike. The smallest and largest per-round ratio go
to stderr.
"""

from __future__ import annotations

import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from measure import emit

RUNS = 9
ROOT = Path(__file__).resolve().parents[1]
OLD_COMMIT = "4f5d509"
DESIGN = ["design", "--detector", "ca", "--ref-cells-total", "32", "--pfa", "1e-6"]
OLD_DESIGN = ["design", "--detector", "ca", "--ref-cells", "32", "--pfa", "1e-6"]
ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def old_tree(tmp: Path) -> Path | None:
    """The tree at OLD_COMMIT, unpacked under ``tmp``; None (with a note) when git cannot give it."""
    if shutil.which("git") is None:
        print("bench_cli: no git; cli_design_over_old_import_path skipped", file=sys.stderr)
        return None
    dest = tmp / "old"
    dest.mkdir()
    archive = subprocess.run(["git", "-C", str(ROOT), "archive", OLD_COMMIT], capture_output=True)
    if archive.returncode != 0:
        print(f"bench_cli: commit {OLD_COMMIT} not in this clone; cli_design_over_old_import_path skipped",
              file=sys.stderr)
        return None
    subprocess.run(["tar", "-x", "-C", str(dest)], input=archive.stdout, check=True)
    return dest


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        commands = {
            "pass": ([sys.executable, "-c", "pass"], ENV),
            "help": ([sys.executable, "-m", "cfarvec", "--help"], ENV),
            "design": ([sys.executable, "-m", "cfarvec", *DESIGN], ENV),
        }
        old = old_tree(Path(tmp))
        if old is not None:
            old_env = dict(ENV, PYTHONPATH=os.pathsep.join([str(old), *filter(None, [ENV.get("PYTHONPATH")])]))
            commands["design_old"] = ([sys.executable, "-m", "cfarvec", *OLD_DESIGN], old_env)
        times = {k: [] for k in commands}
        for round_ in range(RUNS + 1):
            for name, (cmd, env) in commands.items():
                t0 = time.perf_counter()
                subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, env=env, cwd=tmp)
                if round_:  # round 0 writes the bytecode caches
                    times[name].append(time.perf_counter() - t0)
    figures = [("cli_help_over_python_pass", "help", "pass", 3),
               ("cli_design_over_python_pass", "design", "pass", 15)]
    if "design_old" in times:
        figures.append(("cli_design_over_old_import_path", "design", "design_old", 0.6))
    for metric, num, den, target in figures:
        emit(metric, statistics.median(times[num]) / statistics.median(times[den]), "ratio", target, "lower",
             digits=3)
        ratios = [a / b for a, b in zip(times[num], times[den])]
        print(f"{metric}: per-round ratios {min(ratios):.3f} .. {max(ratios):.3f} over {RUNS} rounds",
              file=sys.stderr)


if __name__ == "__main__":
    main()

"""Start-up of the command line, as ratios to a bare ``python -c pass`` measured in the same run.

Prints one JSON line per figure (``make bench``):

* ``cfarvec --help`` / ``python -c pass`` (target <= 3: no command module, numpy or scipy imported);
* ``cfarvec design --detector ca --ref-cells-total 32 --pfa 1e-6`` / ``python -c pass`` (target <= 15);
* the same design command / the same command with every command module imported first, as the
  command line did before it imported per command (``today's import path``; issue 15 asks <= 0.6).

Each figure is the median of several runs of a fresh interpreter; all runs interleave, so a load
change on the machine hits every command alike.
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time

from measure import emit

RUNS = 9
DESIGN = ["design", "--detector", "ca", "--ref-cells-total", "32", "--pfa", "1e-6"]
EAGER = ("import importlib, sys; from cfarvec import cli; "
         "[importlib.import_module('cfarvec.cmd_' + n) for n in cli.COMMANDS]; "
         "sys.exit(cli.main(sys.argv[1:]))")

COMMANDS = {
    "pass": [sys.executable, "-c", "pass"],
    "help": [sys.executable, "-m", "cfarvec", "--help"],
    "design": [sys.executable, "-m", "cfarvec", *DESIGN],
    "design_eager": [sys.executable, "-c", EAGER, *DESIGN],
}


def main() -> None:
    times = {k: [] for k in COMMANDS}
    for _ in range(RUNS):
        for name, cmd in COMMANDS.items():
            t0 = time.perf_counter()
            subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL)
            times[name].append(time.perf_counter() - t0)
    med = {k: statistics.median(v) for k, v in times.items()}
    for metric, value, target in (
        ("cli_help_over_python_pass", med["help"] / med["pass"], 3),
        ("cli_design_over_python_pass", med["design"] / med["pass"], 15),
        ("cli_design_over_eager_imports", med["design"] / med["design_eager"], 0.6),
    ):
        emit(metric, value, "ratio", target, "lower", digits=3)


if __name__ == "__main__":
    main()

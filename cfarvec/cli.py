"""The ``cfarvec`` command: argument parsing and error reporting only.

Each sub-command lives in its own module ``cfarvec/cmd_<name>.py`` exposing
``add_parser(subparsers)``, which adds and returns its parser with ``func``
set to the module's ``run(args) -> exit code``; ``run`` does the work through
the Python API. Bad input anywhere raises
:class:`refmodel.errors.SpecError`, printed here as one line with exit code 2.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from refmodel.errors import SpecError

from . import __version__

# Sub-command modules, in the order they appear in ``--help``.
COMMANDS = ["design", "vectors", "check", "testbench", "cosim", "regression", "synth", "study"]


class _Parser(argparse.ArgumentParser):
    """argparse with usage errors reported as one line, exit code 2."""

    def error(self, message: str) -> None:  # noqa: D401 - argparse hook
        self.exit(2, f"{self.prog}: error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="cfarvec", description="CFAR detector design, golden vectors and testbenches for FPGA/ASIC.")
    parser.add_argument("--version", action="version", version=f"cfarvec {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    for name in COMMANDS:
        importlib.import_module(f"cfarvec.cmd_{name}").add_parser(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except SpecError as exc:
        print(f"cfarvec {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except OSError as exc:
        name = getattr(exc, "filename", None)
        print(f"cfarvec {args.command}: error: {name or ''}: {exc.strerror or exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"cfarvec {args.command}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    raise SystemExit(main())

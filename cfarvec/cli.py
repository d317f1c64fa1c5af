"""The ``cfarvec`` command: argument parsing and error reporting only.

Each sub-command lives in its own module ``cfarvec/cmd_<name>.py`` exposing
``add_parser(subparsers)``, which adds and returns its parser with ``func``
set to the module's ``run(args) -> exit code``; ``run`` does the work through
the Python API. Only the module of the command being run is imported (the
others would bring in numpy, scipy and the simulator runners for nothing);
``cfarvec --help`` imports none of them.

Bad input anywhere raises :class:`refmodel.errors.SpecError`, printed here as
one line (control characters escaped) with exit code 2. SIGTERM and SIGHUP
are handled like Ctrl-C: the command's clean-up runs (no half-written output
folder stays) and the exit code is 128 + the signal number. Output cut short
by its reader (``cfarvec ... | head``) ends quietly with exit code 141, as a
process stopped by SIGPIPE.
"""

from __future__ import annotations

import argparse
import importlib
import os
import signal
import sys
import unicodedata

# Sub-commands in the order they appear in ``--help``, with their one-line help (the only copy).
COMMANDS = {
    "design": "threshold multiplier (alpha) <-> Pfa, Pd and CFAR loss",
    "vectors": "write a golden vector set (stimulus, expected output, manifest)",
    "check": "verify a vector set (hashes, manifest, expected words vs the model)",
    "testbench": "write a cocotb + pure-Verilog co-simulation testbench folder",
    "cosim": "co-simulate RTL against the bit-accurate model (generate, build, run)",
    "regression": "run specs x seeds x simulators x modes; one JUnit file and a summary table",
    "synth": "Yosys cell counts of the reference core for a spec",
    "study": "quantisation-loss study over word widths",
}

#: Signals turned into :class:`Interrupted` while a command runs.
TERMINATING_SIGNALS = (signal.SIGTERM, signal.SIGHUP)

#: Longest error line printed; a longer one keeps its start and its end (the allowed values).
MAX_ERROR_CHARS = 1000

_ESCAPES = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}


class Interrupted(KeyboardInterrupt):
    """SIGTERM or SIGHUP, raised where the program was so that every clean-up runs as for Ctrl-C."""

    def __init__(self, signum: int):
        super().__init__(signal.Signals(signum).name)
        self.signum = signum


def one_line(text: str) -> str:
    """``text`` with every control or format character escaped, shortened to :data:`MAX_ERROR_CHARS`.

    Parameters
    ----------
    text : str
        A message that may echo user input (file names, spec values).

    Returns
    -------
    str
        A single printable line: newlines, escape sequences, bidirectional
        overrides, line and paragraph separators and the other Unicode
        control and format characters (categories ``C*``, ``Zl``, ``Zp``)
        become ``\\n``, ``\\x1b``, ``\\u202e``...
    """
    out = []
    for ch in text:
        if unicodedata.category(ch)[0] == "C" or unicodedata.category(ch) in ("Zl", "Zp"):
            code = ord(ch)
            out.append(_ESCAPES.get(ch) or (f"\\x{code:02x}" if code < 0x100 else
                                            f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}"))
        else:
            out.append(ch)
    line = "".join(out)
    if len(line) > MAX_ERROR_CHARS:
        keep = MAX_ERROR_CHARS // 2 - 3
        line = f"{line[:keep]} ... {line[-keep:]}"
    return line


class _Parser(argparse.ArgumentParser):
    """argparse with usage errors reported as one line, exit code 2."""

    def error(self, message: str) -> None:  # noqa: D401 - argparse hook
        self.exit(2, one_line(f"{self.prog}: error: {message}") + "\n")


class _Version(argparse.Action):
    """``--version``: reads the installed version only when asked (the metadata lookup is slow)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS, help=None):
        super().__init__(option_strings, dest=dest, default=default, nargs=0, help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        from . import __version__

        parser.exit(0, f"cfarvec {__version__}\n")


def _chosen(argv: list[str]) -> str | None:
    """The sub-command named on the command line, if any (top-level options come before it)."""
    for arg in argv:
        if not arg.startswith("-"):
            return arg if arg in COMMANDS else None
    return None


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The argument parser, complete for ``command`` only.

    Parameters
    ----------
    command : str, optional
        The sub-command to be run: only its module is imported; the others
        (all of them when None) get a placeholder parser that shows their
        one-line help in ``cfarvec --help``.
    """
    parser = _Parser(prog="cfarvec", description="CFAR detector design, golden vectors and testbenches for FPGA/ASIC.")
    parser.add_argument("--version", action=_Version, help="print the version and exit")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser, metavar="COMMAND")
    for name, text in COMMANDS.items():
        if name == command:
            importlib.import_module(f"cfarvec.cmd_{name}").add_parser(sub)
        else:
            sub.add_parser(name, help=text)
    return parser


def _on_signal(signum, frame):  # noqa: ARG001 - signal handler signature
    raise Interrupted(signum)


def _print_error(command: str, message: str) -> None:
    try:
        print(one_line(f"cfarvec {command}: {message}"), file=sys.stderr, flush=True)
    except (OSError, ValueError):  # stderr gone (a closed terminal after SIGHUP)
        pass


def _quiet_stdout() -> None:
    """After a broken pipe: point stdout at /dev/null so the flush at exit cannot fail again."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):
        pass


def main(argv: list[str] | None = None) -> int:
    """Run the ``cfarvec`` command line; returns the exit code.

    Parameters
    ----------
    argv : list of str, optional
        The arguments (default ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success, 1 for a result that disagrees (a mismatch), 2 for bad
        input, 128 + N after signal N (130 for Ctrl-C), 141 when the reader
        of the output went away.
    """
    argv = sys.argv[1:] if argv is None else list(argv)
    command = _chosen(argv)
    try:
        parser = build_parser(command)
        args = parser.parse_args(argv)
    except BrokenPipeError:  # --help piped into head
        _quiet_stdout()
        return 141
    previous = {}
    if command is not None:
        try:
            previous = {s: signal.signal(s, _on_signal) for s in TERMINATING_SIGNALS}
        except ValueError:  # not the main thread: leave the signals alone
            previous = {}
    from refmodel.errors import SpecError

    try:
        code = int(args.func(args) or 0)
        sys.stdout.flush()
        return code
    except SpecError as exc:
        _print_error(args.command, f"error: {exc}")
        return 2
    except BrokenPipeError:
        _quiet_stdout()
        return 141
    except OSError as exc:
        name = getattr(exc, "filename", None)
        _print_error(args.command, f"error: {name or ''}: {exc.strerror or exc}")
        return 2
    except KeyboardInterrupt as exc:
        signum = getattr(exc, "signum", signal.SIGINT)
        _print_error(args.command, f"interrupted ({signal.Signals(signum).name})")
        return 128 + int(signum)
    finally:
        for s, handler in previous.items():
            signal.signal(s, handler)


if __name__ == "__main__":
    raise SystemExit(main())

"""``cfarvec check``: verify a vector set against its manifest and the bit-accurate model.

The work is done by :func:`vectors.checker.check_vector_set`. Exit codes: 0
when everything agrees (one ``OK`` line), 1 when anything disagrees (one line
naming the first differing file, line, frame and field), 2 for bad input
(not a set folder).
"""

from __future__ import annotations

import argparse

from vectors.checker import check_vector_set

_DESCRIPTION = """\
Check a folder written by 'cfarvec vectors': the manifest's own seal, the
SHA-256 and line count of every file, that every format carries the same
words, and that the bit-accurate model run on the stimulus gives every
expected word. Exit status 0: all agree; 1: something disagrees (the first
difference is printed: file, line, frame, field); 2: DIR is not a set."""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``check`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser("check", help="verify a vector set (hashes, manifest, expected words vs the model)",
                              description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("folder", metavar="DIR", help="vector set folder")
    p.add_argument("--all", action="store_true", help="print every finding, one a line, after the summary")
    p.set_defaults(func=run)
    return p


def run(args: argparse.Namespace) -> int:
    """Check the set; print the summary; 0 when it agrees, 1 when not."""
    report = check_vector_set(args.folder)
    print(report.summary())
    if args.all:
        for f in report.findings:
            print(f"  {f}")
    return 0 if report.ok else 1

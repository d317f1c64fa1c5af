"""``cfarvec check``: verify a vector set against its manifest and the bit-accurate model.

The work is done by :func:`vectors.checker.check_vector_set`. Exit codes: 0
when everything agrees (one ``OK`` line), 1 when anything disagrees (one line
naming the first differing file, line, frame and field), 2 for bad input
(not a set folder).
"""

from __future__ import annotations

import argparse
import dataclasses
import json

_DESCRIPTION = """\
Check a folder written by 'cfarvec vectors': the manifest's own seal, the
SHA-256 and line count of every file, that every format carries the same
words, and that the bit-accurate model run on the stimulus gives every
expected word. Exit status 0: all agree; 1: something disagrees (the first
difference is printed: file, line, frame, field); 2: DIR is not a set."""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``check`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser("check", description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("folder", metavar="DIR", help="vector set folder")
    p.add_argument("--all", action="store_true", help="print every finding, one a line, after the summary")
    p.add_argument("--json", action="store_true",
                   help="print one JSON object (ok, counts, every finding with its file, line, frame, field)")
    p.set_defaults(func=run)
    return p


def run(args: argparse.Namespace) -> int:
    """Check the set; print the summary; 0 when it agrees, 1 when not."""
    from vectors.checker import check_vector_set

    report = check_vector_set(args.folder)
    if args.json:
        print(json.dumps({"ok": report.ok, "summary": report.summary(), **dataclasses.asdict(report)}))
        return 0 if report.ok else 1
    print(report.summary())
    if args.all:
        for f in report.findings:
            print(f"  {f}")
    return 0 if report.ok else 1

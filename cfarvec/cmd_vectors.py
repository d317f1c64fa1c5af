"""``cfarvec vectors``: write a golden vector set for a block spec.

The work is done by :func:`vectors.vector_set.write_vector_set`; this module
parses the options and prints a one-line summary. File formats, the manifest
and the ``[vectors]`` spec section are described in ``docs/vectors.md``.
"""

from __future__ import annotations

import argparse
import json

from vectors.writers import FORMATS

_DESCRIPTION = """\
Generate stimulus words and the expected output words of the bit-accurate
model into a folder: $readmemh text (always), optionally $readmemb text and
decimal CSV, and manifest.json with the resolved spec, the widths, the seed,
counts and the SHA-256 of every file. The [vectors] section of SPEC selects
the stimulus sources (directed corner cases, scenario frames, random frames).
The set is written to a temporary folder beside DIR and renamed into place
only when complete. Same spec and seed: byte-identical files."""


def add_parser(subparsers) -> argparse.ArgumentParser:
    """Register the ``vectors`` sub-command; returns its parser (see :mod:`cfarvec.cli`)."""
    p = subparsers.add_parser("vectors", description=_DESCRIPTION, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("spec", metavar="SPEC", help="block spec (TOML)")
    p.add_argument("-o", "--output", required=True, metavar="DIR", help="folder to create")
    p.add_argument("--seed", type=int, metavar="N", help="seed (overrides vectors.seed)")
    p.add_argument("--force", action="store_true", help="replace DIR if it exists and is not empty")
    p.add_argument("--formats", metavar="LIST",
                   help=f"file formats, comma-separated, from {','.join(FORMATS)} (overrides vectors.formats; "
                        "hex is always written)")
    p.add_argument("--json", action="store_true", help="print the manifest written, as one JSON object")
    p.set_defaults(func=run)
    return p


def run(args: argparse.Namespace) -> int:
    """Write the set and print one summary line (or the manifest with ``--json``)."""
    from refmodel.block_spec import load_spec
    from refmodel.output_folder import check_safe_target
    from refmodel.spec_fields import choice_list
    from vectors.vector_set import write_vector_set

    check_safe_target(args.output, "--output", protect=[args.spec])
    formats = None if args.formats is None else choice_list("--formats", args.formats, FORMATS)
    spec = load_spec(args.spec)
    m = write_vector_set(spec, args.output, seed=args.seed, formats=formats, force=args.force)
    if args.json:
        print(json.dumps({"output": str(args.output), **m}, sort_keys=True))
        return 0
    names = " ".join(f["name"] for f in m["files"])
    print(f"wrote {args.output}: {m['totals']['frames']} frames, {m['totals']['samples']} samples, "
          f"seed {m['seed']}; {names} manifest.json")
    return 0

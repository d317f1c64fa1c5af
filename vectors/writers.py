"""Vector file formats: text renderings of word streams, written fast, and their parsers.

Three formats, each one word (or row) per line, every line ending in ``\\n``:

``hex``
    ``$readmemh`` text (IEEE Std 1364-2005, section 17.2.9): the word in
    lowercase hexadecimal digits, no prefix, zero-padded to
    ``ceil(bits / 4)`` digits.
``bin``
    ``$readmemb`` text (same section): the word in ``bits`` binary digits.
``csv``
    Decimal comma-separated values with one header line naming the columns.

Text is built without a per-line Python loop: each chunk of words becomes a
byte matrix (one row per line: the digits, then a newline) through integer
vector operations and a digit lookup table, and leaves in one ``write``.
:class:`VectorFileWriter` also keeps the line count and the SHA-256 digest
(FIPS 180-4, through :mod:`hashlib`) as it writes, so a file is never read back
to be described. The parsers here read exactly what the writers write (fixed
width lines); they are strict so that a damaged line is reported where it is.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO, Sequence

import numpy as np

FORMATS = ("hex", "bin", "csv")
SUFFIX = {"hex": ".hex", "bin": ".bin", "csv": ".csv"}

_NEWLINE = ord("\n")
#: Byte value -> its two lowercase hex characters, as a little-endian pair (first character in the low byte).
_HEX_PAIRS = np.array([ord(f"{i:02x}"[0]) | ord(f"{i:02x}"[1]) << 8 for i in range(256)], dtype="<u2")
#: ASCII byte -> digit value (0..15), 255 for anything that is not a hex digit.
HEX_VALUE = np.full(256, 255, dtype=np.uint8)
for _i, _c in enumerate(b"0123456789abcdef"):
    HEX_VALUE[_c] = _i
for _i, _c in enumerate(b"ABCDEF"):
    HEX_VALUE[_c] = 10 + _i


def hex_digits(bits: int) -> int:
    """Hex digits of a ``bits``-wide word: ``ceil(bits / 4)``."""
    return (bits + 3) // 4


def line_bytes(fmt: str, bits: int) -> int:
    """Bytes per line (newline included) of the fixed-width formats ``hex`` and ``bin``."""
    return (hex_digits(bits) if fmt == "hex" else bits) + 1


# --------------------------------------------------------------------------
# Rendering
# --------------------------------------------------------------------------


def _hex_matrix(words: np.ndarray, digits: int) -> np.ndarray:
    """``(n, digits)`` ASCII hex digits of ``words``, most significant first.

    Each byte of the big-endian words becomes two characters through one
    lookup in a 256-entry table of character pairs.
    """
    n = words.shape[0]
    nbytes = (digits + 1) // 2
    be = np.asarray(words, dtype=">u8").view(np.uint8).reshape(n, 8)[:, 8 - nbytes :]
    chars = _HEX_PAIRS[be].view(np.uint8).reshape(n, 2 * nbytes)
    return chars[:, 2 * nbytes - digits :]


def _bin_matrix(words: np.ndarray, bits: int) -> np.ndarray:
    """``(n, bits)`` ASCII binary digits of ``words``, most significant first."""
    w = np.ascontiguousarray(np.asarray(words, dtype=">u8"))
    allbits = np.unpackbits(w.view(np.uint8).reshape(-1, 8), axis=1)  # (n, 64), MSB first
    return allbits[:, 64 - bits :] + np.uint8(ord("0"))


def _dec_matrix(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Decimal digits of non-negative ``values`` and the mask of digits to keep (no leading zeros)."""
    v = np.asarray(values, dtype=np.uint64)
    top = int(v.max()) if v.size else 0
    width = max(1, len(str(top)))
    out = np.empty((v.shape[0], width), dtype=np.uint8)
    ten = np.uint64(10)
    for k in range(width - 1, -1, -1):
        out[:, k] = (v % ten).astype(np.uint8) + np.uint8(ord("0"))
        v = v // ten
    keep = np.logical_or.accumulate(out != ord("0"), axis=1)
    keep[:, -1] = True
    return out, keep


def _with_newline(mat: np.ndarray) -> bytes:
    n, w = mat.shape
    lines = np.empty((n, w + 1), dtype=np.uint8)
    lines[:, :w] = mat
    lines[:, w] = _NEWLINE
    return lines.tobytes()


def render_hex(words: np.ndarray, bits: int) -> bytes:
    """``$readmemh`` lines for ``words``: ``ceil(bits/4)`` lowercase hex digits and ``\\n`` each.

    Parameters
    ----------
    words : numpy.ndarray of uint64
        Words below ``2**bits``.
    bits : int
        Word width, 1..64.

    Returns
    -------
    bytes
        The text, ``len(words) * (ceil(bits/4) + 1)`` bytes.
    """
    return _with_newline(_hex_matrix(words, hex_digits(bits)))


def render_bin(words: np.ndarray, bits: int) -> bytes:
    """``$readmemb`` lines for ``words``: ``bits`` binary digits and ``\\n`` each."""
    return _with_newline(_bin_matrix(words, bits))


def render_csv(columns: Sequence[np.ndarray]) -> bytes:
    """Decimal CSV rows (no header) from equal-length columns of non-negative integers."""
    cols = [_dec_matrix(c) for c in columns]
    n = cols[0][0].shape[0] if cols else 0
    parts, masks = [], []
    for i, (mat, keep) in enumerate(cols):
        parts.append(mat)
        masks.append(keep)
        sep = np.full((n, 1), ord(",") if i < len(cols) - 1 else _NEWLINE, dtype=np.uint8)
        parts.append(sep)
        masks.append(np.ones((n, 1), dtype=bool))
    return np.hstack(parts)[np.hstack(masks)].tobytes()


# --------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class FileRecord:
    """What the manifest says about one written file.

    Attributes
    ----------
    name : str
        File name inside the set folder.
    role : str
        ``"stimulus"`` or ``"expected"``.
    format : str
        ``"hex"``, ``"bin"`` or ``"csv"``.
    word_bits : int
        Width of the words the file carries.
    lines : int
        Text lines in the file (the CSV header included).
    sha256 : str
        SHA-256 of the file's bytes, lowercase hex.
    """

    name: str
    role: str
    format: str
    word_bits: int
    lines: int
    sha256: str

    def to_dict(self) -> dict:
        return {"name": self.name, "role": self.role, "format": self.format, "word_bits": self.word_bits,
                "lines": self.lines, "sha256": self.sha256}


class VectorFileWriter:
    """Append-only writer of one vector file in one format, hashing as it goes.

    Parameters
    ----------
    path : pathlib.Path
        File to create.
    role : str
        ``"stimulus"`` or ``"expected"`` (recorded only).
    fmt : {"hex", "bin", "csv"}
        File format.
    word_bits : int
        Word width (``hex``/``bin`` digit count; recorded for ``csv``).
    header : sequence of str, optional
        CSV column names (``csv`` only).
    """

    def __init__(self, path: Path, role: str, fmt: str, word_bits: int, header: Sequence[str] = ()):
        self.path = Path(path)
        self.role, self.fmt, self.word_bits = role, fmt, word_bits
        self._file: BinaryIO = open(self.path, "wb")
        self._hash = hashlib.sha256()
        self.lines = 0
        if fmt == "csv":
            self._emit((",".join(header) + "\n").encode("ascii"), 1)

    def _emit(self, data: bytes, lines: int) -> None:
        self._file.write(data)
        self._hash.update(data)
        self.lines += lines

    def write(self, words: np.ndarray | None = None, columns: Sequence[np.ndarray] = ()) -> None:
        """Append lines: ``words`` for ``hex``/``bin``, ``columns`` for ``csv``."""
        if self.fmt == "csv":
            n = len(columns[0])
            if n:
                self._emit(render_csv(columns), n)
            return
        n = len(words)
        if n:
            text = render_hex(words, self.word_bits) if self.fmt == "hex" else render_bin(words, self.word_bits)
            self._emit(text, n)

    def close(self) -> FileRecord:
        """Flush, close and describe the file."""
        self._file.close()
        return FileRecord(self.path.name, self.role, self.fmt, self.word_bits, self.lines, self._hash.hexdigest())

    def abort(self) -> None:
        """Close without describing (the caller discards the file)."""
        self._file.close()


# --------------------------------------------------------------------------
# Reading (strict: exactly what the writers produce)
# --------------------------------------------------------------------------


class ParseError(ValueError):
    """A line of a vector file is not what the writer would have written.

    Attributes
    ----------
    line : int
        1-based line number in the file.
    problem : str
        What is wrong with it.
    """

    def __init__(self, line: int, problem: str):
        self.line, self.problem = line, problem
        super().__init__(f"line {line}: {problem}")


def parse_fixed(data: bytes, fmt: str, bits: int, first_line: int = 1) -> np.ndarray:
    """Words from whole fixed-width ``hex`` or ``bin`` lines.

    Parameters
    ----------
    data : bytes
        A whole number of lines, each ``line_bytes(fmt, bits)`` long.
    fmt : {"hex", "bin"}
    bits : int
        Word width; a word with bits set at or above ``bits`` is refused.
    first_line : int
        Line number of the first line in ``data`` (for errors).

    Returns
    -------
    numpy.ndarray of uint64

    Raises
    ------
    ParseError
        At the first line with a wrong character or a too-wide word.
    """
    width = line_bytes(fmt, bits)
    if len(data) % width:
        whole = len(data) - len(data) % width
        parse_fixed(data[:whole], fmt, bits, first_line)  # a bad line before the short tail is the first finding
        raise ParseError(first_line + whole // width, f"not a line of {width - 1} digits and a newline")
    m = np.frombuffer(data, dtype=np.uint8).reshape(-1, width)
    bad_nl = m[:, -1] != _NEWLINE
    if fmt == "hex":
        d = HEX_VALUE[m[:, :-1]]
        bad = bad_nl | (d == 255).any(axis=1)
        words = np.zeros(m.shape[0], dtype=np.uint64)
        for k in range(width - 1):
            words = (words << np.uint64(4)) | d[:, k].astype(np.uint64)
    else:
        d = m[:, :-1] - np.uint8(ord("0"))
        bad = bad_nl | (d > 1).any(axis=1)
        padded = np.zeros((m.shape[0], 64), dtype=np.uint8)
        padded[:, 64 - bits :] = d & 1
        words = np.packbits(padded, axis=1).view(">u8").ravel().astype(np.uint64)
    if bad.any():
        i = int(np.argmax(bad))
        raise ParseError(first_line + i, f"not {width - 1} {fmt} digits and a newline: {bytes(m[i])!r}")
    if bits < 64:
        wide = words >> np.uint64(bits) != 0
        if wide.any():
            i = int(np.argmax(wide))
            raise ParseError(first_line + i, f"bits set above the {bits}-bit word")
    return words


def parse_csv(data: bytes, columns: int, first_line: int) -> np.ndarray:
    """``(n, columns)`` uint64 array from whole CSV rows as :func:`render_csv` writes them.

    Parameters
    ----------
    data : bytes
        Whole rows, each ending in ``\\n`` (no header).
    columns : int
        Fields per row.
    first_line : int
        Line number of the first row (for errors).

    Raises
    ------
    ParseError
        At the first row that is not ``columns`` decimal numbers (1 to 19
        digits, no leading zeros) separated by commas.
    """
    b = np.frombuffer(data, dtype=np.uint8)
    newlines = np.flatnonzero(b == _NEWLINE)

    def fail(byte: int, problem: str):
        row = int(np.searchsorted(newlines, byte))
        end = newlines[row] + 1 if row < newlines.size else b.size
        start = newlines[row - 1] + 1 if row else 0
        raise ParseError(first_line + row, f"{problem}: {bytes(b[start:end])!r}")

    if b.size and b[-1] != _NEWLINE:
        fail(b.size - 1, "no newline at the end")
    term = (b == ord(",")) | (b == _NEWLINE)
    digit = (b >= ord("0")) & (b <= ord("9"))
    if (~term & ~digit).any():
        fail(int(np.argmax(~term & ~digit)), "not a decimal digit or a separator")
    tpos = np.flatnonzero(term)
    starts = np.concatenate(([0], tpos[:-1] + 1)).astype(np.int64)
    lens = tpos - starts
    bad = (lens < 1) | (lens > 19) | ((lens > 1) & (b[np.minimum(starts, b.size - 1)] == ord("0")))
    if bad.any():
        fail(int(tpos[np.argmax(bad)]), "empty field, too many digits or a leading zero")
    if tpos.size % columns:
        fail(int(tpos[-1]), f"not {columns} fields a row")
    kinds = b[tpos].reshape(-1, columns)
    shape_bad = (kinds[:, :-1] != ord(",")).any(axis=1) | (kinds[:, -1] != _NEWLINE)
    if shape_bad.any():
        fail(int(tpos[np.argmax(shape_bad) * columns]), f"not {columns} fields a row")
    idx = np.flatnonzero(digit)
    power = tpos[np.searchsorted(tpos, idx)] - idx - 1
    contrib = (b[idx] - np.uint8(ord("0"))).astype(np.uint64) * _POW10[power]
    field_start_in_idx = np.concatenate(([0], np.cumsum(lens)[:-1]))
    values = np.add.reduceat(contrib, field_start_in_idx) if contrib.size else np.zeros(0, np.uint64)
    return values.reshape(-1, columns)


_POW10 = 10 ** np.arange(19, dtype=np.uint64)

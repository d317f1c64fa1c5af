"""File formats: $readmemh/$readmemb text and decimal CSV, read back independently.

Sources: IEEE Std 1364-2005 section 17.2.9 (memory text: one word per line
here, hex or binary digits without prefix; read by the independent reader in
``test_vectors_readmem.py``); FIPS 180-4 SHA-256 through :mod:`hashlib`;
RFC 4180 for the CSV shape (header line, comma-separated fields), read back with
:func:`numpy.loadtxt`.
"""

from __future__ import annotations

import hashlib

import numpy as np
import pytest
from test_vectors_readmem import read_memory_text

from vectors.writers import ParseError, VectorFileWriter, parse_csv, parse_fixed, render_bin, render_csv, render_hex


def _words(bits: int, n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    w = rng.integers(0, 2**63, size=n, dtype=np.uint64) * np.uint64(2) + rng.integers(0, 2, n, dtype=np.uint64)
    w = w >> np.uint64(64 - bits)
    w[:4] = [0, 1, (1 << bits) - 1, (1 << (bits - 1))]  # both ends of the range and the top bit
    return w


@pytest.mark.parametrize("bits", [1, 3, 4, 5, 13, 29, 32, 33, 47, 62, 63, 64])
def test_hex_lines_are_readmemh_words(bits):
    words = _words(bits, 2000, bits)
    text = render_hex(words, bits).decode("ascii")
    lines = text.split("\n")
    assert lines[-1] == "" and len(lines) == len(words) + 1  # one word per line, newline-terminated
    digits = -(-bits // 4)
    assert all(len(s) == digits and set(s) <= set("0123456789abcdef") for s in lines[:-1])  # zero-padded, no prefix
    assert read_memory_text(text, 16) == [int(w) for w in words]


@pytest.mark.parametrize("bits", [1, 7, 13, 29, 64])
def test_bin_lines_are_readmemb_words(bits):
    words = _words(bits, 1000, 100 + bits)
    text = render_bin(words, bits).decode("ascii")
    assert all(len(s) == bits and set(s) <= {"0", "1"} for s in text.split("\n")[:-1])
    assert read_memory_text(text, 2) == [int(w) for w in words]


def test_csv_reads_back_with_numpy(tmp_path):
    rng = np.random.default_rng(7)
    cols = [rng.integers(0, 10**k, 500, dtype=np.uint64) for k in (1, 3, 9, 18)]
    cols.append(np.array([0, 2**62 - 1] * 250, dtype=np.uint64))  # widest threshold word
    w = VectorFileWriter(tmp_path / "t.csv", "expected", "csv", 62, ["a", "b", "c", "d", "e"])
    w.write(columns=cols)
    rec = w.close()
    text = (tmp_path / "t.csv").read_text()
    assert text.splitlines()[0] == "a,b,c,d,e"
    back = np.loadtxt(tmp_path / "t.csv", delimiter=",", skiprows=1, dtype=np.uint64)
    for i, c in enumerate(cols):
        assert np.array_equal(back[:, i], c)
    # Decimal without leading zeros: every field is str(int(field)).
    assert all(f == str(int(f)) for row in text.splitlines()[1:] for f in row.split(","))
    assert rec.lines == 501


def test_writer_records_hash_and_lines(tmp_path):
    words = _words(17, 3000, 3)
    w = VectorFileWriter(tmp_path / "s.hex", "stimulus", "hex", 17)
    for part in np.array_split(words, 7):
        w.write(part)
    rec = w.close()
    data = (tmp_path / "s.hex").read_bytes()
    assert rec.sha256 == hashlib.sha256(data).hexdigest()  # FIPS 180-4 via hashlib
    assert rec.lines == data.count(b"\n") == 3000
    assert data == render_hex(words, 17)  # chunking does not change the bytes


def test_parsers_invert_the_writers_and_refuse_damage():
    words = _words(29, 500, 11)
    assert np.array_equal(parse_fixed(render_hex(words, 29), "hex", 29), words)
    assert np.array_equal(parse_fixed(render_bin(words, 29), "bin", 29), words)
    rows = render_csv([words, words >> np.uint64(3)])
    assert np.array_equal(parse_csv(rows, 2, 2)[:, 0], words)
    text = bytearray(render_hex(words, 29))
    text[9 * 40 + 2] = ord("g")  # line 41
    with pytest.raises(ParseError) as e:
        parse_fixed(bytes(text), "hex", 29)
    assert e.value.line == 41
    with pytest.raises(ParseError):  # 8 hex digits may hold 32 bits; a 29-bit word may not
        parse_fixed(b"ffffffff\n", "hex", 29)
    with pytest.raises(ParseError) as e:
        parse_csv(b"1,2\n3,04\n", 2, 2)
    assert e.value.line == 3

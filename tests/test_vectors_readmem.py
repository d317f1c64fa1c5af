"""An independent reader of ``$readmemh`` / ``$readmemb`` text, and checks of it.

Written from IEEE Std 1364-2005, section 17.2.9 ("Loading memory data from a
file"), not from cfarvec's code: the file holds white space (spaces,
newlines, tabs, form-feeds), comments (``//`` to the end of the line and
``/* ... */``), address specifications ``@hhh`` (hexadecimal) and numbers in
the base of the task (hex for ``$readmemh``, binary for ``$readmemb``) with
neither a length nor a base format; underscores may appear in numbers (IEEE
Std 1364-2005 section 3.5.1). Other test modules import
:func:`read_memory_text`.
"""

from __future__ import annotations

import re

import pytest

_BLOCK_COMMENT = re.compile(r"/\*.*?\*/", re.S)
_LINE_COMMENT = re.compile(r"//[^\n]*")
_WHITE = re.compile(r"[ \t\n\f\r\v]+")


def read_memory_text(text: str, base: int) -> list[int]:
    """Words as a Verilog simulator loads them, in address order from address 0.

    Parameters
    ----------
    text : str
        File contents.
    base : {16, 2}
        16 for ``$readmemh``, 2 for ``$readmemb``.

    Raises
    ------
    ValueError
        For x/z digits (never written by cfarvec), a digit outside the base,
        or addresses that leave holes.
    """
    text = _LINE_COMMENT.sub("", _BLOCK_COMMENT.sub(" ", text))
    mem: dict[int, int] = {}
    addr = 0
    for tok in _WHITE.split(text):
        if not tok:
            continue
        if tok.startswith("@"):
            addr = int(tok[1:], 16)
            continue
        digits = tok.replace("_", "")
        if re.search(r"[xXzZ?]", digits):
            raise ValueError(f"unknown digits in {tok!r}")
        mem[addr] = int(digits, base)
        addr += 1
    if sorted(mem) != list(range(len(mem))):
        raise ValueError("addresses leave holes")
    return [mem[i] for i in range(len(mem))]


# IEEE Std 1364-2005 17.2.9: comments, white space, underscores and address specifications.
def test_reader_follows_the_standard_text_rules():
    text = "// header comment\n@0 1_f /* block\n comment */ 2\n\f\t3 // trailing\n@3\nA\n"
    assert read_memory_text(text, 16) == [0x1F, 0x2, 0x3, 0xA]
    assert read_memory_text("0000_0101\n11\n", 2) == [5, 3]


def test_reader_refuses_unknown_digits():
    with pytest.raises(ValueError):
        read_memory_text("1x\n", 16)
    with pytest.raises(ValueError):
        read_memory_text("2\n", 2)

"""VHDL names in the port map: the identifier rule, reserved words, source file suffixes.

A port map for a VHDL entity names its entity, ports and generics with
VHDL basic identifiers. :func:`check_identifier` takes the place of the
Verilog rule of :mod:`hdl_tb.port_map` for such a map: a letter, then
letters or digits, each optionally preceded by one underline (IEEE Std
1076-2008, 15.4.2; so no leading, trailing or doubled underline), not a
reserved word (15.10). VHDL identifiers are case-insensitive (15.4.2: "Basic
identifiers differing only in the use of corresponding uppercase and
lowercase letters are considered the same"), so two names equal but for case
name one thing. Extended identifiers (``\\like this\\``, 15.4.3) are not
accepted, and letters are ASCII only (15.4.2 also allows the Latin-1
letters; a name checked here can be pasted into generated VHDL, JSON and
file names without quoting).

References
----------
1. IEEE Std 1076-2008, IEEE Standard VHDL Language Reference Manual,
   15.4 (identifiers) and 15.10 (reserved words).
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

from refmodel.errors import SpecError, require

#: Suffixes of VHDL source files.
VHDL_SUFFIXES = (".vhd", ".vhdl")
MAX_IDENTIFIER_LENGTH = 1024

#: IEEE Std 1076-2008, 15.4.2: basic_identifier ::= letter { [ underline ] letter_or_digit } (ASCII letters).
BASIC_IDENTIFIER = re.compile(r"[A-Za-z](?:_?[A-Za-z0-9])*\Z")

#: Reserved words of IEEE Std 1076-2008, 15.10.
VHDL_2008_RESERVED = frozenset("""
abs access after alias all and architecture array assert assume assume_guarantee attribute begin block body
buffer bus case component configuration constant context cover default disconnect downto else elsif end
entity exit fairness file for force function generate generic group guarded if impure in inertial inout is
label library linkage literal loop map mod nand new next nor not null of on open or others out package
parameter port postponed procedure process property protected pure range record register reject release rem
report restrict restrict_guarantee return rol ror select sequence severity shared signal sla sll sra srl
strong subtype then to transport type unaffected units until use variable vmode vprop vunit wait when while
with xnor xor
""".split())

_ALLOWED = ("a VHDL basic identifier: a letter, then letters or digits each optionally preceded by one "
            "underline (IEEE Std 1076-2008, 15.4.2), not a reserved word")


def is_vhdl_file(path: str | Path) -> bool:
    """True when ``path`` names a VHDL source (``.vhd`` or ``.vhdl``, any case)."""
    return Path(path).suffix.lower() in VHDL_SUFFIXES


def same_name(a: str, b: str) -> bool:
    """True when two VHDL basic identifiers name the same thing (IEEE Std 1076-2008, 15.4.2: case-insensitive)."""
    return a.casefold() == b.casefold()


def check_identifier(field_name: str, name: Any) -> str:
    """Return ``name`` when it is a usable VHDL basic identifier, else raise.

    Parameters
    ----------
    field_name : str
        The spec field or option the name came from (for the error).
    name : any
        The value to check.

    Returns
    -------
    str
        ``name`` unchanged (its case is kept; VHDL ignores it).

    Raises
    ------
    SpecError
        When ``name`` is not a string, breaks the rule of IEEE Std
        1076-2008, 15.4.2 (an extended identifier of 15.4.3 is refused
        too), is longer than 1024 characters, or is a reserved word of
        15.10 in any case.
    """
    require(isinstance(name, str), field_name, f"got {name!r}", _ALLOWED)
    require(name != "", field_name, "got an empty name", _ALLOWED)
    require(len(name) <= MAX_IDENTIFIER_LENGTH, field_name, f"got a name of {len(name)} characters",
            f"at most {MAX_IDENTIFIER_LENGTH} characters")
    if name.startswith("\\"):
        raise SpecError(field_name, f"got the extended identifier {name!r}",
                        "a basic identifier (extended identifiers, IEEE Std 1076-2008 15.4.3, are not accepted)")
    require(BASIC_IDENTIFIER.match(name) is not None, field_name, f"got {name!r}", _ALLOWED)
    require(name.lower() not in VHDL_2008_RESERVED, field_name,
            f"got {name!r}, a VHDL reserved word (IEEE Std 1076-2008, 15.10)", "a name that is not a reserved word")
    return name

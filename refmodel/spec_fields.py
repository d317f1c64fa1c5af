"""Checks of single user-supplied values, shared by every spec section and CLI option.

Each function takes the field's name as the user wrote it (``"detector.guard_cells_per_side"``,
``"vectors.seed"``, ``"--alpha-frac-bits"``), checks one value and returns it in its Python type,
or raises :class:`refmodel.errors.SpecError` naming the field, what was given and what is allowed.
The block spec, the ``[vectors]``, ``[ports]`` and ``[study]`` sections and the command-line
options all check their values here, so one kind of value is described to the user in one way.

List values have one syntax everywhere: a TOML array, or on the command line a comma-separated
string ``"a,b,c"``; integer lists also take inclusive ranges ``"a:b"`` and ``"a:b:step"``.
"""

from __future__ import annotations

import math
from typing import Any, Iterable, Mapping

from .errors import SpecError, require


def choices(values: Iterable[Any]) -> str:
    """The allowed values of a choice field, quoted and comma-separated."""
    return ", ".join(f'"{v}"' for v in values)


def _int_allowed(lo: int | None, hi: int | None) -> str:
    if lo is None and hi is None:
        return "an integer"
    if hi is None:
        return f"an integer >= {lo}"
    if lo is None:
        return f"an integer <= {hi}"
    return f"an integer {lo}..{hi}"


def integer(field: str, value: Any, lo: int | None = None, hi: int | None = None, *, text: bool = False) -> int:
    """An integer in ``lo..hi`` (either bound may be open).

    With ``text=True`` a decimal string (``"1_000"`` allowed) is accepted too, for command-line options.
    """
    allowed = _int_allowed(lo, hi)
    if text and isinstance(value, str):
        try:
            value = int(value.replace("_", ""))
        except ValueError:
            raise SpecError(field, f"got {value!r}", allowed) from None
    require(isinstance(value, int) and not isinstance(value, bool), field, f"got {value!r}", allowed)
    require((lo is None or value >= lo) and (hi is None or value <= hi), field, f"got {value}", allowed)
    return value


def _num_allowed(lo: float | None, hi: float | None, open_lo: bool, open_hi: bool, unit: str) -> str:
    u = f" {unit}" if unit else ""
    if lo is not None and hi is not None:
        return f"a number{u} in {'(' if open_lo else '['}{lo:g}, {hi:g}{')' if open_hi else ']'}"
    if lo is not None:
        return f"a finite number{u} {'>' if open_lo else '>='} {lo:g}"
    if hi is not None:
        return f"a finite number{u} {'<' if open_hi else '<='} {hi:g}"
    return f"a finite number{u}"


def number(field: str, value: Any, lo: float | None = None, hi: float | None = None, *, open_lo: bool = False,
           open_hi: bool = False, text: bool = False, unit: str = "") -> float:
    """A finite real number, optionally bounded (``open_lo``/``open_hi`` exclude the bound).

    With ``text=True`` a decimal string is accepted too, for command-line options.
    """
    allowed = _num_allowed(lo, hi, open_lo, open_hi, unit)
    if isinstance(value, bool):
        raise SpecError(field, f"got {value!r}", allowed)
    if text and isinstance(value, str):
        try:
            value = float(value)
        except ValueError:
            raise SpecError(field, f"got {value!r}", allowed) from None
    require(isinstance(value, (int, float)), field, f"got {value!r}", allowed)
    try:
        x = float(value)
    except OverflowError:  # an integer beyond the float range
        raise SpecError(field, f"got {value}", allowed) from None
    ok = (math.isfinite(x) and (lo is None or (x > lo if open_lo else x >= lo))
          and (hi is None or (x < hi if open_hi else x <= hi)))
    require(ok, field, f"got {value!r}", allowed)
    return x


def choice(field: str, value: Any, options: Iterable[str]) -> str:
    """One of ``options``."""
    options = tuple(options)
    require(isinstance(value, str) and value in options, field, f"got {value!r}", choices(options))
    return value


def boolean(field: str, value: Any) -> bool:
    """``true`` or ``false``."""
    require(isinstance(value, bool), field, f"got {value!r}", "true or false")
    return value


def table(data: Mapping, name: str, defaults: Mapping[str, Any]) -> dict:
    """The TOML table ``name`` of ``data`` merged over ``defaults``; unknown keys are refused."""
    raw = data.get(name, {})
    require(isinstance(raw, Mapping), name, f"got {type(raw).__name__}", "a table")
    unknown = sorted(str(k) for k in set(raw) - set(defaults))
    require(not unknown, f"{name}.{unknown[0] if unknown else ''}", "unknown field", choices(defaults))
    return {**defaults, **raw}


def items(field: str, value: Any) -> list:
    """The items of a list value: a TOML array, a comma-separated string or a single value."""
    if isinstance(value, str):
        parts = [p.strip() for p in value.split(",")]
        require(all(parts), field, f"got {value!r}", "a comma-separated list of values")
        return parts
    if isinstance(value, (list, tuple)):
        return list(value)
    return [value]


def integer_list(field: str, value: Any, lo: int, hi: int) -> tuple[int, ...]:
    """Distinct integers in ``lo..hi``: a list, ``"a,b,c"``, a range ``"a:b"`` or ``"a:b:step"`` (inclusive)."""
    allowed = f"integers {lo}..{hi}: a list, 'a,b,c', a range 'a:b' or 'a:b:step' (inclusive)"
    out: list[int] = []
    for item in items(field, value):
        if isinstance(item, int) and not isinstance(item, bool):
            out.append(item)
            continue
        require(isinstance(item, str), field, f"got {item!r}", allowed)
        try:
            nums = [int(x) for x in item.split(":")]
        except ValueError:
            raise SpecError(field, f"got {item!r}", allowed) from None
        require(len(nums) in (1, 2, 3), field, f"got {item!r}", allowed)
        if len(nums) == 1:
            out.append(nums[0])
            continue
        step = nums[2] if len(nums) == 3 else 1
        require(step >= 1 and nums[1] >= nums[0], field, f"got {item!r}", allowed)
        require(nums[0] >= lo and nums[1] <= hi, field, f"got {item!r}", allowed)
        out.extend(range(nums[0], nums[1] + 1, step))
    require(len(out) > 0, field, "an empty list", allowed)
    bad = [v for v in out if not lo <= v <= hi]
    require(not bad, field, f"got {bad[0] if bad else None}", allowed)
    return tuple(dict.fromkeys(out))


def number_list(field: str, value: Any, lo: float | None = None, *, open_lo: bool = False) -> tuple[float, ...]:
    """Distinct finite numbers (optionally above ``lo``): a list or ``"a,b,c"``."""
    bound = "" if lo is None else f" {'>' if open_lo else '>='} {lo:g}"
    allowed = f"finite numbers{bound}: a list or 'a,b,c'"
    out = []
    for item in items(field, value):
        try:
            x = number(field, item, lo, open_lo=open_lo, text=True)
        except SpecError:
            raise SpecError(field, f"got {item!r}", allowed) from None
        out.append(x)
    require(len(out) > 0, field, "an empty list", allowed)
    return tuple(dict.fromkeys(out))


def choice_list(field: str, value: Any, options: Iterable[str]) -> tuple[str, ...]:
    """Distinct members of ``options``: a list or ``"a,b,c"``."""
    options = tuple(options)
    allowed = "one or more of " + choices(options)
    out = items(field, value)
    require(len(out) > 0, field, "an empty list", allowed)
    bad = [v for v in out if not isinstance(v, str) or v not in options]
    require(not bad, field, f"got {bad[0]!r}" if bad else "", allowed)
    return tuple(dict.fromkeys(out))

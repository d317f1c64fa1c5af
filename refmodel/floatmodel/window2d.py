"""Geometry of a range-Doppler CFAR window: guard rectangle, reference ring, cross-shaped window.

Around the cell under test (CUT) at Doppler offset 0 and range offset 0 the
window spans Doppler offsets ``|d| <= Hd`` and range offsets ``|r| <= Hr``,
with ``Hd = Rd + Gd`` and ``Hr = Rr + Gr``, so it is a rectangle of
``Wd x Wr = (2Hd + 1) x (2Hr + 1)`` cells. The **guard rectangle**
``|d| <= Gd and |r| <= Gr`` holds the CUT and its guard cells; no cell of it
is a reference cell. Two window shapes choose the reference cells:

``"ring"``
    The **reference ring**: every cell of the rectangle outside the guard
    rectangle, ``N = Wd Wr - (2Gd + 1)(2Gr + 1)`` cells.
``"cross"``
    The **cross-shaped window**: only the two arms through the CUT, the
    range arm ``d = 0, Gr < |r| <= Hr`` (``2Rr`` cells) and the Doppler arm
    ``r = 0, Gd < |d| <= Hd`` (``2Rd`` cells), ``N = 2Rd + 2Rr``.

For GO and SO the reference cells split into the **lagging half** (range
offset ``r < 0``) and the **leading half** (``r > 0``), each of ``N_half``
cells; reference cells with ``r = 0`` belong to neither half. The float models
(:mod:`refmodel.floatmodel.float_cfar2d`) and the fixed-point map models
(:mod:`refmodel.fixedpoint.map_fast`, :mod:`refmodel.fixedpoint.map_struct`)
both take their cells and rectangle sums from this one module. Definitions:
``docs/float-model.md`` section 4.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import SpecError, require

RING = "ring"
CROSS = "cross"
#: Window shapes, in documentation order.
WINDOW_SHAPES: tuple[str, ...] = (RING, CROSS)
#: Parts of the reference cells whose sums a detector may need.
PARTS: tuple[str, ...] = ("all", "lag", "lead")

# A rectangle term of a part: (sign, d0, r0, nd, nr), the sum of the window cells at Doppler
# positions d0 .. d0+nd-1 and range positions r0 .. r0+nr-1 (positions from the window's first
# corner, 0 .. Wd-1 and 0 .. Wr-1), added (sign +1) or subtracted (sign -1).
Box = tuple[int, int, int, int, int]


def _count(field: str, value: object) -> int:
    require(isinstance(value, int) and not isinstance(value, bool) and value >= 0, field, f"got {value!r}",
            "an integer >= 0")
    return value


@dataclass(frozen=True)
class Window2D:
    """The reference cells of one 2D window.

    Parameters
    ----------
    shape : {"ring", "cross"}
        Reference ring around the guard rectangle, or cross-shaped window.
    ref_doppler, ref_range : int
        Reference depth ``Rd``, ``Rr`` beyond the guard rectangle along each axis (cells per side).
    guard_doppler, guard_range : int
        Guard cells ``Gd``, ``Gr`` per side of the CUT along each axis.
    """

    shape: str
    ref_doppler: int
    ref_range: int
    guard_doppler: int
    guard_range: int

    # ---- geometry -------------------------------------------------------
    @property
    def hd(self) -> int:
        """``Hd = Rd + Gd``: Doppler cells from the CUT to the window's edge."""
        return self.ref_doppler + self.guard_doppler

    @property
    def hr(self) -> int:
        """``Hr = Rr + Gr``: range cells from the CUT to the window's edge."""
        return self.ref_range + self.guard_range

    @property
    def wd(self) -> int:
        """Window extent along Doppler, ``2Hd + 1``."""
        return 2 * self.hd + 1

    @property
    def wr(self) -> int:
        """Window extent along range, ``2Hr + 1``."""
        return 2 * self.hr + 1

    @property
    def n_cells(self) -> int:
        """Reference cells ``N``: ``Wd Wr - (2Gd+1)(2Gr+1)`` (ring) or ``2Rd + 2Rr`` (cross)."""
        if self.shape == RING:
            return self.wd * self.wr - (2 * self.guard_doppler + 1) * (2 * self.guard_range + 1)
        return 2 * (self.ref_doppler + self.ref_range)

    @property
    def n_half(self) -> int:
        """Cells of each half: ``Wd Hr - (2Gd+1) Gr`` (ring) or ``Rr`` (cross)."""
        if self.shape == RING:
            return self.wd * self.hr - (2 * self.guard_doppler + 1) * self.guard_range
        return self.ref_range

    def member(self) -> np.ndarray:
        """Boolean ``(Wd, Wr)`` mask of the reference cells inside the window rectangle."""
        d, r = np.meshgrid(np.arange(-self.hd, self.hd + 1), np.arange(-self.hr, self.hr + 1), indexing="ij")
        guard = (np.abs(d) <= self.guard_doppler) & (np.abs(r) <= self.guard_range)
        if self.shape == RING:
            return ~guard
        return ~guard & ((d == 0) | (r == 0))

    def offsets(self, part: str = "all") -> tuple[np.ndarray, np.ndarray]:
        """Doppler and range offsets (from the CUT) of the reference cells of ``part``, row-major order."""
        d, r = np.meshgrid(np.arange(-self.hd, self.hd + 1), np.arange(-self.hr, self.hr + 1), indexing="ij")
        sel = self.member()
        if part == "lag":
            sel &= r < 0
        elif part == "lead":
            sel &= r > 0
        return d[sel], r[sel]

    def boxes(self, part: str) -> tuple[Box, ...]:
        """The reference cells of ``part`` as signed rectangles of the window (see ``Box``).

        Ring: the outer rectangle minus the guard rectangle (or the half of
        each beside the CUT's range column). Cross: one rectangle per arm.
        Empty rectangles are left out.
        """
        Rd, Rr, Gd, Gr, Hd, Hr = (self.ref_doppler, self.ref_range, self.guard_doppler, self.guard_range,
                                  self.hd, self.hr)
        gd = 2 * Gd + 1
        if self.shape == RING:
            terms = {
                "all": [(1, 0, 0, self.wd, self.wr), (-1, Rd, Rr, gd, 2 * Gr + 1)],
                "lag": [(1, 0, 0, self.wd, Hr), (-1, Rd, Rr, gd, Gr)],
                "lead": [(1, 0, Hr + 1, self.wd, Hr), (-1, Rd, Hr + 1, gd, Gr)],
            }[part]
        else:
            lag, lead = (1, Hd, 0, 1, Rr), (1, Hd, Hr + Gr + 1, 1, Rr)
            up, down = (1, 0, Hr, Rd, 1), (1, Hd + Gd + 1, Hr, Rd, 1)
            terms = {"all": [lag, lead, up, down], "lag": [lag], "lead": [lead]}[part]
        return tuple(t for t in terms if t[3] > 0 and t[4] > 0)


def make_window(shape: object, ref: object, guard: object, kind: str, *, field: str = "ref",
                names: tuple[str, str, str, str] = ("ref[0] (ref_doppler)", "ref[1] (ref_range)",
                                                    "guard[0] (guard_doppler)", "guard[1] (guard_range)")
                ) -> Window2D:
    """Validate a window; raise :class:`SpecError` naming the field.

    Parameters
    ----------
    shape : object
        ``"ring"`` or ``"cross"``.
    ref, guard : object
        Pairs ``(Rd, Rr)`` and ``(Gd, Gr)`` of integers ``>= 0``.
    kind : str
        Detector kind (GO and SO need non-empty halves).
    field : str
        Name used for errors about the pair as a whole.
    names : tuple of str
        Names of ``Rd``, ``Rr``, ``Gd``, ``Gr`` in errors.
    """
    require(isinstance(shape, str) and shape in WINDOW_SHAPES, "window", f"got {shape!r}",
            ", ".join(f'"{s}"' for s in WINDOW_SHAPES))
    for value, what, pair in ((ref, field, ("ref_doppler", "ref_range")), (guard, "guard",
                                                                            ("guard_doppler", "guard_range"))):
        if not isinstance(value, (tuple, list)) or len(value) != 2:
            raise SpecError(what, f"got {value!r}", f"a pair ({pair[0]}, {pair[1]}) of integers >= 0")
    rd, rr = _count(names[0], ref[0]), _count(names[1], ref[1])
    gd, gr = _count(names[2], guard[0]), _count(names[3], guard[1])
    w = Window2D(shape, rd, rr, gd, gr)
    require(rd + rr >= 1, field, f"got ({rd}, {rr}): no reference cells",
            "ref_doppler >= 0 and ref_range >= 0, not both 0")
    if kind in ("go", "so"):
        need = ("ref_range >= 1 (cross-shaped window)" if shape == CROSS
                else "ref_range >= 1, or guard_range >= 1 with ref_doppler >= 1")
        require(w.n_half >= 1, field, f"got ref=({rd}, {rr}), guard=({gd}, {gr}): the lagging and leading range "
                                      "halves are empty", f"{need} for kind 'go' or 'so'")
    return w


def box_sums(table: np.ndarray, boxes: tuple[Box, ...], n_d: int, n_r: int, out: np.ndarray | None = None
             ) -> np.ndarray:
    """Signed rectangle sums for every CUT from a summed-area table.

    Parameters
    ----------
    table : numpy.ndarray, shape (..., P_d + 1, P_r + 1)
        ``table[..., i, j]`` = sum of the padded cells ``[:i, :j]`` (zero first row and column).
        The window of CUT ``(a, b)`` starts at padded position ``(a, b)``.
    boxes : tuple of Box
    n_d, n_r : int
        CUTs along each axis.
    out : numpy.ndarray, optional
        Where to put the result (shape ``(..., n_d, n_r)``, the table's dtype).

    Returns
    -------
    numpy.ndarray, shape (..., n_d, n_r)
        The sum of the terms; in the table's dtype (integer tables wrap modulo ``2**64`` and stay
        exact where the true sum fits).

    References
    ----------
    .. [1] F. C. Crow, "Summed-area tables for texture mapping", Computer Graphics (Proc. SIGGRAPH),
       vol. 18, no. 3, pp. 207-212, 1984 (a rectangle sum is four look-ups).
    """
    shape = table.shape[:-2] + (n_d, n_r)
    if out is None:
        out = np.empty(shape, dtype=table.dtype)
    first = True
    for sign, d0, r0, nd, nr in boxes:  # in place: fresh temporaries cost more than the arithmetic
        d1, r1 = d0 + nd, r0 + nr
        a = table[..., d1 : d1 + n_d, r1 : r1 + n_r]
        b = table[..., d0 : d0 + n_d, r1 : r1 + n_r]
        c = table[..., d1 : d1 + n_d, r0 : r0 + n_r]
        d = table[..., d0 : d0 + n_d, r0 : r0 + n_r]
        if first:
            np.subtract(a, b, out=out)
            out -= c
            out += d
            if sign < 0:
                np.negative(out, out=out)
            first = False
        elif sign > 0:
            out += a
            out -= b
            out -= c
            out += d
        else:
            out -= a
            out += b
            out += c
            out -= d
    if first:
        out[...] = 0
    return out

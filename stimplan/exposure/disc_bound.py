"""The largest power in a disc of given radius over every centre, with a proven bound.

A retinal map is piecewise constant: each sample holds its irradiance over
its whole cell (``pitch_x_um x pitch_y_um``). The power in a disc of radius
``r`` centred *anywhere* (not only on samples) is

    P(c, r) = sum over cells of E_cell * area(cell inside the disc),

with the cell areas in closed form (no subsampling). :func:`largest_disc_power`
finds ``max over c of P(c, r)`` by branch and bound over squares of centres:

* every square gets an upper bound of ``P`` over all its centres and a lower
  bound (a value at its centre);
* squares whose upper bound is within the tolerance of the best value found
  are closed; the others are split into four;
* the answer is the largest upper bound of a closed square: an upper bound of
  the maximum over every centre, at most ``1 + tol`` times the best value
  found.

The upper bounds are

* **dilation**: a disc of radius ``r`` centred within ``delta`` of ``c`` lies
  inside the disc of radius ``r + delta`` centred on ``c``;
* **lune**: moving the centre by ``d`` swaps two lunes of equal area, so
  ``P(c', r) - P(c, r) <= (E_max - E_min) * lune(d, r)`` with ``E_max`` and
  ``E_min`` over the cells of the annulus ``r - d <= |x - c| <= r + d``
  (exact on a uniform plateau, where the dilation bound is loose);
* on big squares, cheap band sums from a summed-area table: the cells that
  touch the dilated disc, a whole band of rows at a time (and, as the lower
  bound, the cells wholly inside the disc).

Light outside the map is zero, and a centre outside the map never holds more
than its projection onto the map (projection onto a convex set does not
increase distances to its points), so the centres searched are those of the
map's rectangle. Every sum carries a first-order bound of its float64
rounding error, added to the upper bounds.

References
----------
.. [1] A. H. Land and A. G. Doig, "An automatic method of solving discrete
   programming problems", Econometrica 28, 497-520 (1960) (branch and bound).
.. [2] F. C. Crow, "Summed-area tables for texture mapping", Comput. Graph.
   18(3), 207-212 (1984).
.. [3] N. J. Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed.,
   SIAM (2002), §4.2 (error bound of recursive summation).
.. [4] E. W. Weisstein, "Circle-Circle Intersection", MathWorld (area of the
   lens of two equal circles).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba as nb
import numpy as np

from ..errors import ConfigError

__all__ = [
    "cell_areas_um2",
    "summed_area_table",
    "PreparedMap",
    "DiscMaximum",
    "largest_disc_power",
    "bound_over_cells",
    "lune_area_mm2",
    "disc_sums_at",
]

_EPS = 2.0**-52
#: Squares evaluated at most per search; beyond it the open squares' bounds are kept.
MAX_SQUARES = 3_000_000
_ROOT_TILES = 48  # squares per side of the map at the start


def summed_area_table(irradiance: np.ndarray) -> np.ndarray:
    """``S[i, j] = sum(irradiance[:i, :j])`` in float64, shape ``(rows + 1, cols + 1)``."""
    a = np.ascontiguousarray(irradiance)
    if a.ndim != 2:
        raise ConfigError("irradiance", a.shape, "a 2-D map")
    out = np.zeros((a.shape[0] + 1, a.shape[1] + 1), dtype=np.float64)
    _sat(a, out)
    return out


@nb.njit(cache=True, nogil=True, parallel=True)
def _sat(a, out):  # pragma: no cover - compiled
    # row prefix sums, then each column's running sum of them: the same additions, in
    # the same order, as one serial pass (the rounding bound is unchanged)
    rows, cols = a.shape
    for i in nb.prange(rows):
        acc = 0.0
        for j in range(cols):
            acc += a[i, j]
            out[i + 1, j + 1] = acc
    chunk = 512
    for c in nb.prange((cols + chunk - 1) // chunk):
        j0 = 1 + c * chunk
        j1 = min(j0 + chunk, cols + 1)
        for i in range(1, rows + 1):
            for j in range(j0, j1):
                out[i, j] += out[i - 1, j]


@dataclass(frozen=True, eq=False)
class PreparedMap:
    """A map with its summed-area table, ready for disc sums at any centre.

    Coordinates are ``x = col * pitch_x_um``, ``y = row * pitch_y_um`` (µm from
    the centre of sample ``(0, 0)``, rows downwards).
    """

    irradiance: np.ndarray
    table: np.ndarray
    pitch_x_um: float
    pitch_y_um: float
    total: float
    peak: float

    @classmethod
    def of(cls, irradiance: np.ndarray, pitch_x_um: float, pitch_y_um: float) -> PreparedMap:
        irr = np.ascontiguousarray(irradiance)
        table = summed_area_table(irr)
        peak = float(irr.max()) if irr.size else 0.0
        return cls(irr, table, float(pitch_x_um), float(pitch_y_um), float(table[-1, -1]), peak)

    @property
    def shape(self) -> tuple[int, int]:
        return self.irradiance.shape

    def allowance(self, radius_um: float) -> float:
        """Bound of the float64 rounding error of one disc sum (same units as the sums).

        Each table entry is a recursive sum of at most ``rows + cols`` terms of
        the map (error at most ``(rows + cols) * eps * total``); a disc sum takes
        four entries per row it spans; each cut cell's area is a sum of four
        quadrant areas of at most ``(r + pitch)^2``.
        """
        rows, cols = self.shape
        px, py = self.pitch_x_um, self.pitch_y_um
        n_rows = 2.0 * radius_um / py + 3.0
        n_cut = 4.0 * (radius_um / px + radius_um / py + 4.0)
        tables = 8.0 * (rows + cols + 8) * _EPS * self.total * n_rows
        cut = n_cut * 32.0 * _EPS * (radius_um + px + py) ** 2 * 1e-6 * self.peak
        return tables + cut


@nb.njit(cache=True, nogil=True)
def _h(t, r):  # pragma: no cover - compiled
    """Integral of sqrt(r^2 - x^2) from 0 to t, 0 <= t <= r."""
    return 0.5 * (t * math.sqrt(max(r * r - t * t, 0.0)) + r * r * math.asin(min(t / r, 1.0)))


@nb.njit(cache=True, nogil=True)
def _quadrant(x, y, r):  # pragma: no cover - compiled
    """Signed area of the disc (centre 0, radius r) within [0, x] x [0, y]."""
    s = 1.0
    if x < 0.0:
        s = -s
        x = -x
    if y < 0.0:
        s = -s
        y = -y
    x = min(x, r)
    y = min(y, r)
    if x * x + y * y <= r * r:
        return s * x * y
    xc = math.sqrt(max(r * r - y * y, 0.0))
    return s * (y * xc + _h(x, r) - _h(xc, r))


@nb.njit(cache=True, nogil=True)
def _cell_area(xl, yl, px, py, r):  # pragma: no cover - compiled
    """Exact area of the cell [xl, xl + px] x [yl, yl + py] inside the disc (centre 0, radius r)."""
    a = (
        _quadrant(xl + px, yl + py, r)
        - _quadrant(xl, yl + py, r)
        - _quadrant(xl + px, yl, r)
        + _quadrant(xl, yl, r)
    )
    return min(max(a, 0.0), px * py)


@nb.njit(cache=True, nogil=True)
def _cell_areas(r, px, py, hy, hx, out):  # pragma: no cover - compiled
    # the disc is symmetric about the middle row and column: one quadrant, mirrored
    for i in range(hy + 1):
        for j in range(hx + 1):
            a = _cell_area((j - 0.5) * px, (i - 0.5) * py, px, py, r)
            out[hy + i, hx + j] = a
            out[hy - i, hx + j] = a
            out[hy + i, hx - j] = a
            out[hy - i, hx - j] = a


def cell_areas_um2(
    radius_um: float, pitch_x_um: float, pitch_y_um: float, half_rows: int, half_cols: int
) -> np.ndarray:
    """Exact area (µm^2, float64) of each cell inside a disc centred on the middle sample.

    The kernel has ``2 * half_rows + 1`` rows and ``2 * half_cols + 1`` columns;
    each cell is ``pitch_x_um x pitch_y_um`` around its sample. The areas are in
    closed form (integrals of ``sqrt(r^2 - x^2)``), not sampled.
    """
    out = np.zeros((2 * int(half_rows) + 1, 2 * int(half_cols) + 1), dtype=np.float64)
    _cell_areas(
        float(radius_um), float(pitch_x_um), float(pitch_y_um), int(half_rows), int(half_cols), out
    )
    return out


@nb.njit(cache=True, nogil=True)
def _rect(table, r0, r1, c0, c1):  # pragma: no cover - compiled
    """Sum of the map over rows [r0, r1) and columns [c0, c1), clipped to the map."""
    rows = table.shape[0] - 1
    cols = table.shape[1] - 1
    r0 = max(r0, 0)
    c0 = max(c0, 0)
    r1 = min(r1, rows)
    c1 = min(c1, cols)
    if r0 >= r1 or c0 >= c1:
        return 0.0
    return table[r1, c1] - table[r0, c1] - table[r1, c0] + table[r0, c0]


@nb.njit(cache=True, nogil=True)
def _band_span(cy, r, y0, y1):  # pragma: no cover - compiled
    """Half-widths of the disc over the band y0 <= y <= y1: (largest, smallest; -1 if empty)."""
    a = y0 - cy
    b = y1 - cy
    near = 0.0 if a <= 0.0 <= b else min(abs(a), abs(b))
    far = max(abs(a), abs(b))
    if near >= r:
        return -1.0, -1.0
    wmax = math.sqrt(r * r - near * near)
    wmin = math.sqrt(r * r - far * far) if far < r else -1.0
    return wmax, wmin


@nb.njit(cache=True, nogil=True)
def _exact(table, irr, cx, cy, r, px, py):  # pragma: no cover - compiled
    """Area-weighted disc sum at centre (cx, cy) µm: exact areas of the cut cells."""
    rows, cols = irr.shape
    if r <= 0.0:
        return 0.0
    i0 = max(int(math.floor((cy - r) / py + 0.5)), 0)
    i1 = min(int(math.ceil((cy + r) / py - 0.5)), rows - 1)
    cell = px * py
    acc = 0.0
    for i in range(i0, i1 + 1):
        y0 = (i - 0.5) * py
        y1 = y0 + py
        wmax, wmin = _band_span(cy, r, y0, y1)
        if wmax < 0.0:
            continue
        # cells wholly inside: their x range within [cx - wmin, cx + wmin]
        ja = 1
        jb = 0
        if wmin > 0.0:
            ja = int(math.ceil((cx - wmin) / px + 0.5))
            jb = int(math.floor((cx + wmin) / px - 0.5))
        ka = max(int(math.floor((cx - wmax) / px - 0.5)) + 1, 0)
        kb = min(int(math.ceil((cx + wmax) / px + 0.5)) - 1, cols - 1)
        if ja <= jb:
            acc += cell * _rect(table, i, i + 1, ja, jb + 1)
            left_end = min(ja - 1, kb)
            right_start = max(jb + 1, ka)
        else:
            left_end = kb
            right_start = kb + 1
        yr0 = y0 - cy
        for j in range(ka, left_end + 1):
            acc += irr[i, j] * _cell_area((j - 0.5) * px - cx, yr0, px, py, r)
        for j in range(right_start, kb + 1):
            acc += irr[i, j] * _cell_area((j - 0.5) * px - cx, yr0, px, py, r)
    return acc * 1e-6  # µm^2 -> mm^2


@nb.njit(cache=True, nogil=True)
def _banded(table, cx, cy, r_in, r_out, px, py, band):  # pragma: no cover - compiled
    """Sums of (cells inside disc r_in, cells touching disc r_out), ``band`` rows at a time."""
    rows = table.shape[0] - 1
    cell = px * py
    i0 = max(int(math.floor((cy - r_out) / py + 0.5)), 0)
    i1 = min(int(math.ceil((cy + r_out) / py - 0.5)), rows - 1)
    inner = 0.0
    outer = 0.0
    i = i0
    while i <= i1:
        k = min(i + band, i1 + 1)
        y0 = (i - 0.5) * py
        y1 = (k - 0.5) * py
        wmax, _ = _band_span(cy, r_out, y0, y1)
        if wmax >= 0.0:
            ka = int(math.floor((cx - wmax) / px - 0.5)) + 1
            kb = int(math.ceil((cx + wmax) / px + 0.5)) - 1
            outer += _rect(table, i, k, ka, kb + 1)
        _, wmin = _band_span(cy, r_in, y0, y1)
        if wmin > 0.0:
            ja = int(math.ceil((cx - wmin) / px + 0.5))
            jb = int(math.floor((cx + wmin) / px - 0.5))
            inner += _rect(table, i, k, ja, jb + 1)
        i = k
    return inner * cell * 1e-6, outer * cell * 1e-6


@nb.njit(cache=True, nogil=True)
def _annulus_spread(irr, cx, cy, r0, r1, px, py):  # pragma: no cover - compiled
    """E_max - E_min over the cells touching the annulus r0 <= |x - c| <= r1 (0 outside the map)."""
    rows, cols = irr.shape
    emax = -1.0
    emin = np.inf
    outside = False
    i0 = int(math.floor((cy - r1) / py + 0.5))
    i1 = int(math.ceil((cy + r1) / py - 0.5))
    if i0 < 0 or i1 > rows - 1:
        outside = True
    for i in range(max(i0, 0), min(i1, rows - 1) + 1):
        y0 = (i - 0.5) * py
        y1 = y0 + py
        wmax, _ = _band_span(cy, r1, y0, y1)
        if wmax < 0.0:
            continue
        ka = int(math.floor((cx - wmax) / px - 0.5)) + 1
        kb = int(math.ceil((cx + wmax) / px + 0.5)) - 1
        if ka < 0 or kb > cols - 1:
            outside = True
        ja = 1
        jb = 0
        if r0 > 0.0:
            _, wmin = _band_span(cy, r0, y0, y1)
            if wmin > 0.0:
                ja = int(math.ceil((cx - wmin) / px + 0.5))
                jb = int(math.floor((cx + wmin) / px - 0.5))
        for j in range(max(ka, 0), min(kb, cols - 1) + 1):
            if ja <= j <= jb:
                continue
            e = irr[i, j]
            if e > emax:
                emax = e
            if e < emin:
                emin = e
    if outside:
        emin = min(emin, 0.0)
        emax = max(emax, 0.0)
    if emax < 0.0:
        return 0.0
    return emax - emin


@nb.njit(cache=True, nogil=True)
def _lune_mm2(d, r):  # pragma: no cover - compiled
    """Area of D(c', r) outside D(c, r) for |c - c'| = d, mm^2 (from µm)."""
    if d <= 0.0:
        return 0.0
    if d >= 2.0 * r:
        return math.pi * r * r * 1e-6
    lens = 2.0 * r * r * math.acos(d / (2.0 * r)) - 0.5 * d * math.sqrt(4.0 * r * r - d * d)
    return max(math.pi * r * r - lens, 0.0) * 1e-6


def lune_area_mm2(shift_um: float, radius_um: float) -> float:
    """Area (mm^2) of a disc of ``radius_um`` outside the same disc moved by ``shift_um``.

    References
    ----------
    .. [1] Weisstein, "Circle-Circle Intersection", MathWorld: the lens of two
       circles of radius r at distance d has area 2 r^2 acos(d / 2r) - (d / 2) sqrt(4 r^2 - d^2).
    """
    return float(_lune_mm2(float(shift_um), float(radius_um)))


@nb.njit(parallel=True, cache=True, nogil=True)
def _squares(table, irr, cx, cy, hx, hy, r, px, py, band, exact, lo, hi):  # pragma: no cover
    for t in nb.prange(cx.size):
        d = math.sqrt(hx * hx + hy * hy)
        if exact:
            low = _exact(table, irr, cx[t], cy[t], r, px, py)
            up = _exact(table, irr, cx[t], cy[t], r + d, px, py)
            if d <= 4.0 * max(px, py):
                spread = _annulus_spread(irr, cx[t], cy[t], max(r - d, 0.0), r + d, px, py)
                up = min(up, low + spread * _lune_mm2(d, r))
        else:
            low, up = _banded(table, cx[t], cy[t], r, r + d, px, py, band)
        lo[t] = low
        hi[t] = up


@nb.njit(parallel=True, cache=True, nogil=True)
def _exact_many(table, irr, cx, cy, r, px, py, out):  # pragma: no cover - compiled
    for t in nb.prange(cx.size):
        out[t] = _exact(table, irr, cx[t], cy[t], r, px, py)


def disc_sums_at(prepared: PreparedMap, radius_um: float, x_um, y_um) -> np.ndarray:
    """Exact area-weighted disc sums (mW for a map in mW/mm^2) at centres ``(x_um, y_um)``.

    Coordinates as in :class:`PreparedMap`; centres may fall between samples.
    """
    cx = np.ascontiguousarray(x_um, dtype=np.float64).ravel()
    cy = np.ascontiguousarray(y_um, dtype=np.float64).ravel()
    out = np.empty(cx.size, dtype=np.float64)
    if cx.size:
        p = prepared
        _exact_many(
            p.table, p.irradiance, cx, cy, float(radius_um), p.pitch_x_um, p.pitch_y_um, out
        )
    return out


@dataclass(frozen=True)
class DiscMaximum:
    """The largest disc power of a map at one radius.

    Attributes
    ----------
    bound_mw : float
        Upper bound of the disc power over every centre (rounding included).
    found_mw : float
        The exact disc power at ``(x_um, y_um)``; ``found_mw <= bound_mw <=
        (1 + tol) * found_mw`` unless ``complete`` is False.
    x_um, y_um : float
        Where it was found (map coordinates of :class:`PreparedMap`).
    squares : int
        Squares of centres evaluated.
    complete : bool
        False if the search stopped at its square budget (the bound still holds).
    """

    bound_mw: float
    found_mw: float
    x_um: float
    y_um: float
    squares: int
    complete: bool


def _cheap_enough(h_um: float, radius_um: float, pitch_um: float, tol: float) -> bool:
    # band sums lose about 1.27 (band + 1) pitch / r of the disc; use them while that is
    # well inside the tolerance, or while the squares are larger than two samples
    return h_um > radius_um / 2.0 or 2.6 * pitch_um / max(radius_um, 1e-30) < tol / 3.0


def _search(p, r, cx, cy, hx, hy, tol, start, max_squares):
    """Branch and bound from root squares of half-sizes ``hx, hy`` centred at ``cx, cy``.

    Returns ``(largest bound of a closed square, best value, its x, its y, squares
    evaluated, complete)``.
    """
    best, bx, by = start
    px, py = p.pitch_x_um, p.pitch_y_um
    closed = 0.0
    evaluated = 0
    complete = True
    pitch = max(px, py)
    cx = np.ascontiguousarray(cx, dtype=np.float64)
    cy = np.ascontiguousarray(cy, dtype=np.float64)
    while cx.size:
        h = max(hx, hy)
        exact = not _cheap_enough(h, r, pitch, tol)
        band = max(int(h / py), 1)
        lo = np.empty(cx.size)
        hi = np.empty(cx.size)
        _squares(p.table, p.irradiance, cx, cy, hx, hy, r, px, py, band, exact, lo, hi)
        hi += p.allowance(r + math.hypot(hx, hy))
        evaluated += cx.size
        k = int(np.argmax(lo))
        if lo[k] > best:
            best, bx, by = float(lo[k]), float(cx[k]), float(cy[k])
        keep = hi > (1.0 + tol) * best
        if not keep.all():
            closed = max(closed, float(hi[~keep].max()))
        if not keep.any():
            break
        cx, cy = cx[keep], cy[keep]
        if evaluated + 4 * cx.size > max_squares:
            closed = max(closed, float(hi[keep].max()))
            complete = False
            break
        hx, hy = hx / 2.0, hy / 2.0
        cx = np.concatenate([cx - hx, cx + hx, cx - hx, cx + hx])
        cy = np.concatenate([cy - hy, cy - hy, cy + hy, cy + hy])
    return closed, best, bx, by, evaluated, complete


def bound_over_cells(
    prepared: PreparedMap,
    radius_um: float,
    rows,
    cols,
    *,
    found_mw: float,
    x_um: float,
    y_um: float,
    tol: float = 0.009,
    max_squares: int = MAX_SQUARES,
) -> DiscMaximum:
    """Bound of the disc power over every centre within the cells of samples ``(rows, cols)``.

    ``found_mw`` is a disc power already found at ``(x_um, y_um)`` (it prunes
    from the start). The result's ``bound_mw`` covers the given cells only.
    """
    p = prepared
    r = float(radius_um)
    rr = np.asarray(rows, dtype=np.float64).ravel()
    cc = np.asarray(cols, dtype=np.float64).ravel()
    closed, best, bx, by, evaluated, complete = _search(
        p,
        r,
        cc * p.pitch_x_um,
        rr * p.pitch_y_um,
        p.pitch_x_um / 2.0,
        p.pitch_y_um / 2.0,
        tol,
        (float(found_mw), float(x_um), float(y_um)),
        max_squares,
    )
    found = float(disc_sums_at(p, r, [bx], [by])[0])
    return DiscMaximum(max(closed, found), found, bx, by, evaluated, complete)


def largest_disc_power(
    prepared: PreparedMap,
    radius_um: float,
    *,
    tol: float = 0.009,
    seeds: tuple[tuple[float, float], ...] = (),
    max_squares: int = MAX_SQUARES,
) -> DiscMaximum:
    """Largest power in a disc of ``radius_um`` over every centre of the map, with a bound.

    Parameters
    ----------
    prepared : PreparedMap
    radius_um : float
        Disc radius on the retina, > 0.
    tol : float
        Relative gap allowed between the bound and the value found.
    seeds : tuple of (x_um, y_um)
        Centres to try first (for example the maximum at a neighbouring radius).
    max_squares : int
        Budget of squares; when it is spent the bound is that of the open squares.

    References
    ----------
    .. [1] Land and Doig (1960); Crow (1984); see the module notes.
    """
    p = prepared
    r = float(radius_um)
    if not r > 0:
        raise ConfigError("radius_um", radius_um, "> 0")
    rows, cols = p.shape
    px, py = p.pitch_x_um, p.pitch_y_um
    best, bx, by = 0.0, cols // 2 * px, rows // 2 * py
    if seeds:
        sx = np.array([s[0] for s in seeds], dtype=np.float64)
        sy = np.array([s[1] for s in seeds], dtype=np.float64)
        vals = disc_sums_at(p, r, sx, sy)
        k = int(np.argmax(vals))
        best, bx, by = float(vals[k]), float(sx[k]), float(sy[k])
    if p.total <= 0.0:
        return DiscMaximum(0.0, 0.0, bx, by, 0, True)
    # root squares tile the map's rectangle of centres
    size_um = max(cols * px, rows * py) / _ROOT_TILES
    nx = max(int(math.ceil(cols * px / size_um)), 1)
    ny = max(int(math.ceil(rows * py / size_um)), 1)
    hx = cols * px / nx / 2.0
    hy = rows * py / ny / 2.0
    gx = -px / 2.0 + (2 * np.arange(nx) + 1) * hx
    gy = -py / 2.0 + (2 * np.arange(ny) + 1) * hy
    cx, cy = (a.ravel() for a in np.meshgrid(gx, gy))
    closed, best, bx, by, evaluated, complete = _search(
        p, r, cx, cy, hx, hy, tol, (best, bx, by), max_squares
    )
    found = float(disc_sums_at(p, r, [bx], [by])[0])
    return DiscMaximum(max(closed, found), found, bx, by, evaluated, complete)

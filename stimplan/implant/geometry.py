"""Closed-form areas of polygons and discs within grid cells, and lattice counts."""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from .. import validate

__all__ = [
    "SQRT3",
    "centred_hexagonal_number",
    "silicon_responsivity_limit_a_per_w",
    "polygon_quadrant_area",
    "polygon_quadrant_grid",
    "disc_quadrant_area",
    "regular_polygon",
    "rotate_um",
]


SQRT3 = math.sqrt(3.0)


def centred_hexagonal_number(rings: int) -> int:
    """Number of pixels in a centred hexagonal patch with ``rings`` rings, ``3k(k+1)+1``."""
    k = validate.integer("rings", rings, lo=0)
    return 3 * k * (k + 1) + 1


def silicon_responsivity_limit_a_per_w(wavelength_nm: float) -> float:
    """Upper limit of a silicon photodiode's responsivity, A/W.

    One electron per photon: ``R = e λ / (h c) = λ[µm] / 1.23984`` A/W.
    Real photodiodes reach less (reflection, incomplete collection); the
    limit holds only below the band-gap wavelength (about 1100 nm).

    Parameters
    ----------
    wavelength_nm : float
        Wavelength in nm, in (200, 1100].

    Returns
    -------
    float

    References
    ----------
    .. [1] Photon energy ``E = h c / λ``, ``h c / e = 1.23984 eV µm``
       (CODATA 2018 values of h, c and e).
    """
    lam = validate.number("wavelength_nm", wavelength_nm, lo=200.0, hi=1100.0, lo_open=True)
    from scipy.constants import c, e, h

    return lam * 1e-9 * e / (h * c)


def polygon_quadrant_area(
    vertices_um: np.ndarray, x_um: np.ndarray, y_um: np.ndarray
) -> np.ndarray:
    """Area of a polygon inside the quadrant ``{x <= X, y <= Y}``.

    Green's theorem gives ``area(P ∩ Q) = ∮_∂P min(x, X) d min(y, Y)``; on each
    edge both clamped coordinates are piecewise linear with breaks where the
    edge crosses ``x = X`` or ``y = Y``, so the trapezoid rule on the pieces is
    exact.

    Parameters
    ----------
    vertices_um : ndarray, shape (V, 2)
        Vertices ``(x, y)``, counter-clockwise (simple polygon).
    x_um, y_um : ndarray
        Corner coordinates ``X`` and ``Y``; broadcast against each other.

    Returns
    -------
    ndarray
        Areas, float64, of the broadcast shape.

    References
    ----------
    .. [1] Green's theorem, ``∬ ∂N/∂x dA = ∮ N dy`` with
       ``N = min(x, X) [y <= Y]``.
    """
    vert = np.asarray(vertices_um, dtype=np.float64)
    xa, ya = vert[:, 0], vert[:, 1]
    xb, yb = np.roll(xa, -1), np.roll(ya, -1)
    dx, dy = xb - xa, yb - ya
    X = np.asarray(x_um, dtype=np.float64)[..., np.newaxis]
    Y = np.asarray(y_um, dtype=np.float64)[..., np.newaxis]
    safe_dx = np.where(dx == 0, 1.0, dx)
    safe_dy = np.where(dy == 0, 1.0, dy)
    tx = np.where(dx == 0, 0.0, np.clip((X - xa) / safe_dx, 0.0, 1.0))
    ty = np.where(dy == 0, 0.0, np.clip((Y - ya) / safe_dy, 0.0, 1.0))
    t1 = np.minimum(tx, ty)
    t2 = np.maximum(tx, ty)
    total = 0.0
    prev_u = np.minimum(xa, X)
    prev_w = np.minimum(ya, Y)
    for t in (t1, t2, None):
        if t is None:
            u = np.minimum(xb, X)
            w = np.minimum(yb, Y)
        else:
            u = np.minimum(xa + t * dx, X)
            w = np.minimum(ya + t * dy, Y)
        total = total + 0.5 * (prev_u + u) * (w - prev_w)
        prev_u, prev_w = u, w
    return np.sum(total, axis=-1)


@nb.njit(parallel=True, cache=True, nogil=True)
def polygon_quadrant_grid(vert, xr, yr):  # pragma: no cover - compiled
    """:func:`polygon_quadrant_area` of one polygon at the corners ``(xr[p, j], yr[p, i])``
    of each pixel ``p``'s sample grid: ``out[p, i, j]`` (float64), in one pass."""
    m, ncx = xr.shape
    ncy = yr.shape[1]
    nv = vert.shape[0]
    out = np.empty((m, ncy, ncx))
    for p in nb.prange(m):
        for i in range(ncy):
            Y = yr[p, i]
            for j in range(ncx):
                X = xr[p, j]
                total = 0.0
                for e in range(nv):
                    xa, ya = vert[e, 0], vert[e, 1]
                    xb, yb = vert[(e + 1) % nv, 0], vert[(e + 1) % nv, 1]
                    dx, dy = xb - xa, yb - ya
                    tx = 0.0 if dx == 0 else min(max((X - xa) / dx, 0.0), 1.0)
                    ty = 0.0 if dy == 0 else min(max((Y - ya) / dy, 0.0), 1.0)
                    t1, t2 = min(tx, ty), max(tx, ty)
                    pu, pw = min(xa, X), min(ya, Y)
                    u, w = min(xa + t1 * dx, X), min(ya + t1 * dy, Y)
                    total += 0.5 * (pu + u) * (w - pw)
                    pu, pw = u, w
                    u, w = min(xa + t2 * dx, X), min(ya + t2 * dy, Y)
                    total += 0.5 * (pu + u) * (w - pw)
                    pu, pw = u, w
                    u, w = min(xb, X), min(yb, Y)
                    total += 0.5 * (pu + u) * (w - pw)
                out[p, i, j] = total
    return out


def _segment_area(a: np.ndarray, r: float) -> np.ndarray:
    """Area of the disc of radius ``r`` (centre 0) with ``x >= a``."""
    a = np.clip(a, -r, r)
    return r * r * np.arccos(a / r) - a * np.sqrt(np.maximum(r * r - a * a, 0.0))


def _corner_area(a: np.ndarray, b: np.ndarray, r: float) -> np.ndarray:
    """Area of the disc with ``x >= a, y >= b`` for ``a, b >= 0``."""
    a = np.minimum(a, r)
    b = np.minimum(b, r)
    y1 = np.sqrt(np.maximum(r * r - a * a, 0.0))
    y0 = np.minimum(b, y1)

    def prim(y: np.ndarray) -> np.ndarray:  # ∫ sqrt(r² - y²) dy
        return 0.5 * (y * np.sqrt(np.maximum(r * r - y * y, 0.0)) + r * r * np.arcsin(y / r))

    return np.maximum(prim(y1) - prim(y0) - a * (y1 - y0), 0.0)


def disc_quadrant_area(radius_um: float, x_um: np.ndarray, y_um: np.ndarray) -> np.ndarray:
    """Area of a disc centred on the origin inside the quadrant ``{x <= X, y <= Y}``.

    Closed form from the circular segment ``r² acos(a/r) - a sqrt(r² - a²)``
    and the integral of the circle ``∫ sqrt(r² - y²) dy``, by inclusion and
    exclusion over the four quadrant signs.

    Parameters
    ----------
    radius_um : float
        Disc radius, > 0.
    x_um, y_um : ndarray
        Corner coordinates; broadcast against each other.

    Returns
    -------
    ndarray
        Areas, float64.
    """
    r = float(radius_um)
    X = np.asarray(x_um, dtype=np.float64)
    Y = np.asarray(y_um, dtype=np.float64)
    hx = _segment_area(X, r)  # area with x >= X
    hy = _segment_area(Y, r)
    hmx = _segment_area(-X, r)
    q = _corner_area(np.abs(X), np.abs(Y), r)
    # upper-right area U(X, Y) = area with x >= X and y >= Y, for every sign.
    xn, yn = X < 0, Y < 0
    upper = np.where(
        xn & yn,
        hy - hmx + q,
        np.where(xn, hy - q, np.where(yn, hx - q, q)),
    )
    return math.pi * r * r - hx - hy + upper


def regular_polygon(n: int, circumradius: float, start_deg: float) -> np.ndarray:
    ang = np.deg2rad(start_deg + 360.0 / n * np.arange(n))
    return np.stack([circumradius * np.cos(ang), circumradius * np.sin(ang)], axis=1)


def rotate_um(xy: np.ndarray, deg: float) -> np.ndarray:
    c, s = math.cos(math.radians(deg)), math.sin(math.radians(deg))
    out = np.empty_like(xy, dtype=np.float64)
    out[..., 0] = c * xy[..., 0] - s * xy[..., 1]
    out[..., 1] = s * xy[..., 0] + c * xy[..., 1]
    return out

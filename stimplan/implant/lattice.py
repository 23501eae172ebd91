"""The pixel lattice of an implant: which lattice points its outline holds."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .geometry import SQRT3

__all__ = ["outline_half_extent_um", "inside_outline", "lattice_um", "inside_hexagon_rings"]


# -- lattice -------------------------------------------------------------------
def outline_half_extent_um(implant: Any) -> tuple[float, float]:
    """Half-width and half-height of the outline, µm."""
    if implant.outline in ("hexagon", "circle"):
        if implant.rings is not None:
            r = (implant.rings + 0.5) * implant.pitch_um
            return r, r
        return implant.diameter_um / 2.0, implant.diameter_um / 2.0
    if implant.rows is not None:
        return implant.cols * implant.pitch_um / 2.0, implant.rows * implant.pitch_um / 2.0
    h = implant.height_um if implant.outline == "rectangle" else implant.width_um
    return implant.width_um / 2.0, h / 2.0


def inside_outline(implant: Any, xy: np.ndarray) -> np.ndarray:
    """Which points ``xy`` (..., 2) lie inside the outline (array frame)."""
    tol = 1e-9 * implant.pitch_um
    x, y = xy[..., 0], xy[..., 1]
    if implant.outline == "circle":
        return np.hypot(x, y) <= implant.diameter_um / 2.0 + tol
    if implant.outline == "hexagon":
        radius = implant.diameter_um / 2.0
        apothem = radius * SQRT3 / 2.0
        ang = np.deg2rad([30.0, 90.0, 150.0])
        g = np.max(np.abs(x[..., None] * np.cos(ang) + y[..., None] * np.sin(ang)), axis=-1)
        return g <= apothem + tol
    hw, hh = outline_half_extent_um(implant)
    return (np.abs(x) <= hw + tol) & (np.abs(y) <= hh + tol)


def lattice_um(implant: Any) -> tuple[np.ndarray, np.ndarray]:
    """Sorted centres (n, 2) in the array frame and their lattice rows."""
    p = implant.pitch_um
    dy = p * SQRT3 / 2.0 if implant.layout == "hex" else p
    shift_odd = 0.5 if implant.layout == "hex" else 0.0
    if implant.rows is not None:
        j, i = np.meshgrid(np.arange(implant.rows), np.arange(implant.cols), indexing="ij")
        x = p * (i + shift_odd * (j % 2))
        y = dy * j
        x = x - 0.5 * (x.min() + x.max())
        y = y - 0.5 * (y.min() + y.max())
        keep = np.ones(x.shape, dtype=bool)
    else:
        radius = None if implant.rings is None else (implant.rings + 0.5) * p
        hw, hh = outline_half_extent_um(implant)
        nj = int(math.ceil(hh / dy)) + 1
        ni = int(math.ceil(hw / p)) + 1
        j, i = np.meshgrid(np.arange(-nj, nj + 1), np.arange(-ni, ni + 1), indexing="ij")
        x = p * (i + shift_odd * (j % 2))
        y = dy * j
        pts = np.stack([x, y], axis=-1)
        if radius is not None:
            keep = inside_hexagon_rings(implant, pts, radius)
        elif implant.pixel_inclusion == "center":
            keep = inside_outline(implant, pts)
        else:
            verts = implant.polygon_local_um("cell")
            keep = np.ones(x.shape, dtype=bool)
            for vx, vy in verts:
                keep &= inside_outline(implant, pts + np.array([vx, vy]))
    x, y, j = x[keep], y[keep], j[keep]
    order = np.lexsort((x, -j))
    centres = np.stack([x[order], y[order]], axis=1)
    centres.setflags(write=False)
    rows = j[order]
    rows.setflags(write=False)
    return centres, rows


def inside_hexagon_rings(implant: Any, pts: np.ndarray, radius: float) -> np.ndarray:
    """Which points lie within a hexagon of ``radius`` (pointy sides up)."""
    apothem = radius * SQRT3 / 2.0
    ang = np.deg2rad([30.0, 90.0, 150.0])
    g = np.max(np.abs(pts[..., 0, None] * np.cos(ang) + pts[..., 1, None] * np.sin(ang)), axis=-1)
    return g <= apothem + 1e-9 * implant.pitch_um

"""Reuse across a sequence: stimuli that are translations of one another.

A stimulus that differs from another only by a translation on the retina (a
moved spot, a drifting grating, the reversed partner of a checkerboard) has,
in the image domain, the same hologram times a linear phase ramp (the
Fourier shift theorem). The pixel-aperture envelope does not move with the
pattern, so the reuse is only taken where the envelope changes little over
the pattern.

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005),
   §2.1.3 (shift theorem) and §4.2.2 (pixel-aperture envelope).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import ndimage

__all__ = ["translation_between", "shift_in_samples", "envelope_change"]

_MOVABLE = {"center_x_um", "center_y_um", "phase_deg", "reversal"}


def _params(stim) -> dict:
    return stim.to_dict()


def translation_between(a, b, grid, *, tolerance: float = 0.02) -> tuple[float, float] | None:
    """Retinal translation ``(dx_um, dy_um)`` that turns stimulus ``a`` into ``b``, or None.

    Candidates come from the parameters (centre, grating phase, checkerboard
    reversal); each is verified by rendering both on the field of ``grid``
    (sampled by at most 256 per axis) and comparing ``b`` with ``a`` shifted,
    away from the field edges (mean absolute difference below ``tolerance``).

    Parameters
    ----------
    a, b : Stimulus
    grid : RetinalGrid
        The design grid.
    tolerance : float
        Largest accepted mean absolute difference (intensities in 0..1).

    References
    ----------
    .. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), §2.1.3 (shift theorem).
    """
    if type(a) is not type(b):
        return None
    pa, pb = _params(a), _params(b)
    if set(pa) != set(pb):
        return None
    diff = {k for k in pa if pa[k] != pb[k]}
    if not diff or not diff <= _MOVABLE:
        return None
    dx = float(pb.get("center_x_um", 0.0)) - float(pa.get("center_x_um", 0.0))
    dy = float(pb.get("center_y_um", 0.0)) - float(pa.get("center_y_um", 0.0))
    theta = math.radians(float(pa.get("rotation_deg", 0.0)))
    if "phase_deg" in diff and "period_um" in pa:
        du = -(float(pb["phase_deg"]) - float(pa["phase_deg"])) / 360.0 * float(pa["period_um"])
        dx += du * math.cos(theta)
        dy += du * math.sin(theta)
    elif "phase_deg" in diff:
        return None
    if "reversal" in diff:
        if "check_um" not in pa:
            return None
        dx += float(pa["check_um"]) * math.cos(theta)
        dy += float(pa["check_um"]) * math.sin(theta)
    grid = _coarse(grid)
    rows, cols = shift_in_samples((dx, dy), grid)
    ra, rb = a.render(grid), b.render(grid)
    if float(rb.max()) <= 0 or float(ra.max()) <= 0:
        return None
    moved = ndimage.shift(ra, (rows, cols), order=1, mode="grid-wrap")
    m0 = max(1, int(0.1 * grid.rows))
    m1 = max(1, int(0.1 * grid.cols))
    inner = (slice(m0, grid.rows - m0), slice(m1, grid.cols - m1))
    err = float(np.mean(np.abs(moved[inner] - rb[inner])))
    return (dx, dy) if err <= tolerance else None


def _coarse(grid, samples: int = 256):
    """The same field sampled by at most ``samples`` per axis (for cheap comparisons)."""
    from .grid import RetinalGrid

    fy = max(1, grid.rows // samples)
    fx = max(1, grid.cols // samples)
    if fy == 1 and fx == 1:
        return grid
    return RetinalGrid(
        (grid.rows // fy, grid.cols // fx), grid.pitch_x_um * fx, grid.pitch_y_um * fy
    )


def shift_in_samples(offset_um: tuple[float, float], grid) -> tuple[float, float]:
    """A retinal offset ``(dx_um, dy_um)`` as fractional design samples ``(rows, cols)``."""
    return -offset_um[1] / grid.pitch_y_um, offset_um[0] / grid.pitch_x_um


def envelope_change(lit: np.ndarray, shift_rc: tuple[float, float], fill_factor: float) -> float:
    """Largest relative change of the pixel envelope over ``lit`` when it moves by ``shift_rc``.

    The pattern of a translated hologram keeps the envelope weight of its old
    place; this is the largest ``|env(new)/env(old) - 1|`` over the lit samples.

    References
    ----------
    .. [1] Goodman (2005), §4.2.2, eq. (4-28).
    """
    ny, nx = lit.shape
    f = math.sqrt(fill_factor)
    rr, cc = np.nonzero(lit)
    ky = (rr - ny // 2) / ny
    kx = (cc - nx // 2) / nx
    new = np.sinc(f * ky) ** 2 * np.sinc(f * kx) ** 2
    old = np.sinc(f * (ky - shift_rc[0] / ny)) ** 2 * np.sinc(f * (kx - shift_rc[1] / nx)) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(old > 0, new / old, np.inf)
    return float(np.max(np.abs(ratio - 1.0))) if ratio.size else 0.0

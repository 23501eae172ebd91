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

from .grid import RetinalGrid

__all__ = [
    "family_key",
    "proposed_translations",
    "verify_translation",
    "translation_between",
    "shift_in_samples",
    "envelope_change",
    "coarse_grid",
]

_MOVABLE = {"center_x_um", "center_y_um", "phase_deg", "reversal"}


def _params(stim) -> dict:
    return stim.to_dict()


def family_key(stim) -> str:
    """Stimuli with equal keys can differ only by a translation (their other parameters agree)."""
    import json

    p = {k: val for k, val in _params(stim).items() if k not in _MOVABLE}
    return type(stim).__name__ + json.dumps(p, sort_keys=True, default=str)


def proposed_translations(a, b) -> list[tuple[float, float]]:
    """Retinal translations ``(dx_um, dy_um)`` that the parameters say turn ``a`` into ``b``.

    From the centres, the grating phase (both the given phase step and the one
    wrapped into half a period either way: a grating is periodic) and the
    checkerboard reversal. Empty if the stimuli differ otherwise. The smallest
    translation comes first; none is verified (see :func:`translation_between`).
    """
    if type(a) is not type(b):
        return []
    pa, pb = _params(a), _params(b)
    if set(pa) != set(pb):
        return []
    diff = {k for k in pa if pa[k] != pb[k]}
    if not diff or not diff <= _MOVABLE:
        return []
    dx = float(pb.get("center_x_um", 0.0)) - float(pa.get("center_x_um", 0.0))
    dy = float(pb.get("center_y_um", 0.0)) - float(pa.get("center_y_um", 0.0))
    theta = math.radians(float(pa.get("rotation_deg", 0.0)))
    steps = [0.0]
    if "phase_deg" in diff:
        if "period_um" not in pa:
            return []
        d = float(pb["phase_deg"]) - float(pa["phase_deg"])
        wrapped = (d + 180.0) % 360.0 - 180.0
        steps = sorted({-d / 360.0, -wrapped / 360.0}, key=abs)
        steps = [u * float(pa["period_um"]) for u in steps]
    if "reversal" in diff:
        if "check_um" not in pa:
            return []
        steps = [u + float(pa["check_um"]) for u in steps]
    out = [(dx + u * math.cos(theta), dy + u * math.sin(theta)) for u in steps]
    return sorted(out, key=lambda t: math.hypot(*t))


def verify_translation(a, b, offset_um, grid, *, tolerance: float = 0.02, renders=None) -> bool:
    """Whether ``b`` is ``a`` moved by ``offset_um`` on the field of ``grid``.

    Both are rendered on the field sampled by at most 256 per axis, and ``b``
    is compared with ``a`` shifted, away from the field edges (mean absolute
    difference at most ``tolerance``, intensities in 0..1). ``renders`` is an
    optional dict used as a cache of the coarse renders (keyed by ``id``).
    """
    grid = coarse_grid(grid)

    def render(stim):
        if renders is None:
            return stim.render(grid)
        hit = renders.get(id(stim))
        if hit is None:
            hit = renders[id(stim)] = stim.render(grid)
        return hit

    ra, rb = render(a), render(b)
    if float(rb.max()) <= 0 or float(ra.max()) <= 0:
        return False
    rows, cols = shift_in_samples(offset_um, grid)
    moved = ndimage.shift(ra, (rows, cols), order=1, mode="grid-wrap")
    m0 = max(1, int(0.1 * grid.rows))
    m1 = max(1, int(0.1 * grid.cols))
    inner = (slice(m0, grid.rows - m0), slice(m1, grid.cols - m1))
    return float(np.mean(np.abs(moved[inner] - rb[inner]))) <= tolerance


def translation_between(
    a, b, grid, *, tolerance: float = 0.02, renders=None
) -> tuple[float, float] | None:
    """Retinal translation ``(dx_um, dy_um)`` that turns stimulus ``a`` into ``b``, or None.

    The smallest of :func:`proposed_translations` that
    :func:`verify_translation` confirms (``renders``: its cache of renders).

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
    for t in proposed_translations(a, b):
        if verify_translation(a, b, t, grid, tolerance=tolerance, renders=renders):
            return t
    return None


def coarse_grid(grid, samples: int = 256):
    """The same field sampled by at most ``samples`` per axis (for cheap comparisons)."""

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

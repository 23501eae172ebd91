"""The largest disc power of one map, bounded over every centre.

A map is uniform within each sample. Its FFT disc-power map gives the disc
power at every sample centre (within a proven round-off bound); a centre
anywhere in a sample's cell is within half the cell's diagonal of the sample,
so the disc grown by that diagonal bounds it. Where the grown disc is loose,
the cells that may hold more are searched by branch and bound.

References
----------
.. [1] A. H. Land and A. G. Doig, "An automatic method of solving discrete
   programming problems", Econometrica 28, 497-520 (1960) (branch and bound).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from ..grid import RetinalGrid
from .disc_bound import PreparedMap, bound_over_cells, disc_sums_at, lune_area_mm2
from .discs import peak_location

__all__ = [
    "CENTRE_TOLERANCE",
    "CentreBound",
    "MAX_CANDIDATES",
    "centre_slack_um",
    "bound_between_samples",
    "sums_at_samples",
    "sample_bound",
    "whole_map_mw",
    "windowed_maximum",
]

#: Samples summed exactly at most, to settle a maximum the FFT round-off leaves open.
MAX_CANDIDATES = 4096
#: Gap between the bound over every centre and the value found that is refined away.
CENTRE_TOLERANCE = 0.009
#: Cells at most, and squares at most, that the refinement between samples may take per
#: map and diameter; beyond them the (looser, still valid) dilated bound is kept.
REFINE_CELLS = 512
REFINE_SQUARES = 60_000


@dataclass(frozen=True)
class CentreBound:
    """A map's largest disc power at one diameter: bound and where it was found.

    ``row`` and ``col`` are fractional sample indices (``x = col * pitch_x_um``).
    """

    bound_mw: float
    found_mw: float
    row: float
    col: float
    tight: bool


def centre_slack_um(grid: RetinalGrid) -> float:
    """Growth of a disc's diameter that covers every centre of a sample's cell.

    A centre anywhere in the cell of sample ``c0`` is within half the cell's
    diagonal of ``c0``, so its disc lies inside the disc about ``c0`` whose
    diameter is larger by the whole diagonal.
    """
    return math.hypot(grid.pitch_x_um, grid.pitch_y_um)


def bound_between_samples(
    pm: np.ndarray,
    prepared: PreparedMap,
    diameter_um: float,
    *,
    slack_um: float,
    err_mw: float,
    found_mw: float,
    row: int,
    col: int,
    plain_map: Callable[[], tuple[np.ndarray, float]] | None = None,
) -> CentreBound:
    """Bound over every centre (not only samples) of the disc power at ``diameter_um``.

    Parameters
    ----------
    pm : ndarray
        FFT disc-power map (mW) at ``diameter_um + slack_um``, each value within
        ``err_mw``; so ``max(pm) + err_mw`` bounds every centre.
    prepared : PreparedMap
        The same map, for exact sums.
    diameter_um : float
        The disc diameter on the retina.
    slack_um : float
        :func:`centre_slack_um` of the map's grid.
    err_mw : float
        Round-off bound of ``pm``.
    found_mw : float
        The exact disc power at sample ``(row, col)``.
    plain_map : callable, optional
        Returns the FFT disc-power map at ``diameter_um`` itself and its round-off
        bound. Used when too many cells are open for the branch and bound: moving
        a centre by up to half a diagonal swaps two lunes of equal area, so the
        largest sample value plus (largest - smallest irradiance) x lune bounds
        every centre (exact on a plateau, where the grown disc is loosest).

    Returns
    -------
    CentreBound
        ``bound_mw``: where the grown-disc bound is more than
        :data:`CENTRE_TOLERANCE` above ``found_mw``, the cells that may hold a
        larger value are searched by branch and bound
        (:func:`~stimplan.exposure.disc_bound.bound_over_cells`); ``found_mw``,
        ``row``, ``col``: the largest exact value met and its fractional sample
        index (between samples if the search found more there); ``tight``: False
        if that search stopped at its budget (the bound still holds).
    """
    d, err, found = diameter_um, err_mw, found_mw
    # no disc holds more than the whole map (tight once a disc holds all the light); the
    # exact sums near the FFT maximum are needed only if its value plus its round-off
    # bound is not already within the tolerance
    whole = whole_map_mw(prepared)
    dilated = min(float(pm.max()) + err, whole)
    if dilated > (1.0 + CENTRE_TOLERANCE) * found:
        dilated = min(sample_bound(pm, prepared, d + slack_um, err), whole)
    at_sample = CentreBound(dilated, found, float(row), float(col), True)
    if dilated <= (1.0 + CENTRE_TOLERANCE) * found:
        return at_sample
    thr = (1.0 + CENTRE_TOLERANCE) * found - err
    open_ = pm >= thr
    n_open = int(np.count_nonzero(open_))
    if n_open > REFINE_CELLS:
        spread = prepared.peak - float(prepared.irradiance.min())
        swap = spread * lune_area_mm2(slack_um / 2.0, d / 2.0)
        # the plain map's maximum is at least ``found``: its transform is only worth its
        # cost when the lune term alone keeps the bound within the tolerance (plateaus)
        if plain_map is None or swap > CENTRE_TOLERANCE * found:
            return replace(at_sample, tight=False)
        plain, plain_err = plain_map()
        lune = float(plain.max()) + plain_err + swap
        bound = min(dilated, lune)
        return replace(at_sample, bound_mw=bound, tight=bound <= (1.0 + CENTRE_TOLERANCE) * found)
    rr, cc = np.nonzero(open_)
    res = bound_over_cells(
        prepared,
        d / 2.0,
        rr,
        cc,
        found_mw=found,
        x_um=col * prepared.pitch_x_um,
        y_um=row * prepared.pitch_y_um,
        tol=CENTRE_TOLERANCE * 0.6,
        max_squares=REFINE_SQUARES,
    )
    rest = float(np.max(np.where(open_, -np.inf, pm))) + err if n_open < pm.size else 0.0
    bound = min(dilated, max(res.bound_mw, rest, found))
    if res.found_mw > found:
        return CentreBound(
            bound,
            res.found_mw,
            res.y_um / prepared.pitch_y_um,
            res.x_um / prepared.pitch_x_um,
            res.complete,
        )
    return replace(at_sample, bound_mw=bound, tight=res.complete)


def whole_map_mw(prepared: PreparedMap) -> float:
    """Upper bound of the map's whole power (mW): no disc anywhere holds more.

    The summed-area table's last entry is a recursive sum of every sample, within
    ``(rows + cols) eps`` of it relatively (Higham 2002, §4.2).
    """
    rows, cols = prepared.shape
    cell_mm2 = prepared.pitch_x_um * prepared.pitch_y_um * 1e-6
    return prepared.total * cell_mm2 * (1.0 + 4.0 * (rows + cols + 4) * 2.0**-52)


def sums_at_samples(prepared: PreparedMap, diameter_um: float, rows, cols) -> np.ndarray:
    """Exact disc sums centred on samples ``(rows, cols)`` (mW for a map in mW/mm^2)."""
    x = np.asarray(cols, dtype=np.float64) * prepared.pitch_x_um
    y = np.asarray(rows, dtype=np.float64) * prepared.pitch_y_um
    return disc_sums_at(prepared, diameter_um / 2.0, x, y)


def sample_bound(pm, prepared: PreparedMap, diameter_um: float, err: float) -> float:
    """Upper bound of the largest disc power over every sample centre.

    Every FFT value is within ``err`` of the exact sum
    (:meth:`DiscIntegrator.error_bound_mw`), so only samples within ``2 err`` of
    the FFT maximum can hold the largest exact sum. If they are few, their exact
    sums settle it; otherwise the FFT maximum plus ``err`` bounds it.
    """
    top = float(pm.max())
    rr, cc = np.nonzero(pm >= top - 2.0 * err)
    if rr.size > MAX_CANDIDATES:
        return top + err
    return float(sums_at_samples(prepared, diameter_um, rr, cc).max())


def windowed_maximum(
    prepared: PreparedMap,
    diameter_um: float,
    integ,
    *,
    box: tuple[slice, slice, float],
    map_norms: tuple[float, float],
    spectra: dict,
    slack_um: float,
) -> tuple[CentreBound, int]:
    """The largest disc power from FFT disc-power maps computed over a box of centres.

    Parameters
    ----------
    prepared : PreparedMap
        The map.
    diameter_um : float
        The disc diameter.
    integ : DiscIntegrator
        Its :meth:`~stimplan.exposure.discs.DiscIntegrator.window_power_map_mw`
        and round-off bound.
    box : (slice, slice, float)
        ``(rows, cols, rest)`` as from
        :meth:`stimplan.exposure.pooled.PooledMap.region`: every centre outside
        the sample box holds at most ``rest`` mW.
    map_norms : (float, float)
        The map's 1- and 2-norms.
    spectra : dict
        Kept spectra of the map's part (shared by the grown and the plain disc).
    slack_um : float
        :func:`centre_slack_um`.

    Returns
    -------
    CentreBound, int
        The bound (at least ``rest``) and the disc-power maps computed. The
        maps are zero outside the box; :func:`bound_between_samples` refines the
        grown-disc bound inside it.
    """
    rows, cols, rest = box
    irr = prepared.irradiance
    f32 = irr if irr.dtype == np.float32 else irr.astype(np.float32)
    l1, l2 = map_norms
    d = diameter_um
    count = [0]

    def inside(diameter):
        # the map in float32 with its round-off bound: the transform's, and for a float64
        # transform the rounding of the result to float32 (half an ulp of the largest
        # value, with a factor of 2)
        count[0] += 1
        out = np.zeros(prepared.shape, dtype=np.float32)
        part, double = integ.window_power_map_mw(f32, diameter, rows, cols, spectra)
        out[rows, cols] = part
        top = float(np.max(np.abs(part))) if part.size else 0.0
        err = integ.error_bound_mw(l1, l2, diameter, double=double)
        return out, err + ((top + err) * 2.0**-23 if double else 0.0)

    pm, err = inside(d + slack_um)  # the grown disc covers the centres between samples
    r, c = peak_location(pm)
    exact = float(sums_at_samples(prepared, d, [r], [c])[0])
    res = bound_between_samples(
        pm,
        prepared,
        d,
        slack_um=slack_um,
        err_mw=err,
        found_mw=exact,
        row=r,
        col=c,
        plain_map=lambda: inside(d),
    )
    return replace(res, bound_mw=max(res.bound_mw, rest)), count[0]

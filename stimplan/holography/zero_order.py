"""The zero order coherent with the signal: the largest irradiance over its unknown phase.

The light the SLM leaves unmodulated comes from the same laser as the
modulated light. Where it is coherent with it (same polarisation, no
flicker), the two add in field with a relative phase that is not known:

    I = I_mod + I_zero + 2 sqrt(I_mod I_zero) cos(Δφ).

A prediction shows the mean over ``Δφ`` (the intensities added). An
exposure figure must be an upper bound, so it takes ``cos(Δφ) = 1`` at every
place for the coherent share ``c`` of the zero order (the rest, the
polarisation the SLM does not modulate and any flicker, does not
interfere): ``I_mod + I_zero + 2 sqrt(c I_mod I_zero)``, which for ``c = 1``
is ``(sqrt(I_mod) + sqrt(I_zero))²``.

References
----------
.. [1] M. Born and E. Wolf, *Principles of Optics*, 7th ed. (1999), §7.2
   (interference of two beams) and §10.9 (orthogonal polarisations do not
   interfere; section numbers from memory).
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np

from .. import validate
from ..errors import ConfigError

__all__ = ["coherent_zero_order_bound"]

_U32 = 2.0**-24


@nb.njit(parallel=True, cache=True, nogil=True)
def _bound(total, zero, coherent, slack, out):  # pragma: no cover - compiled
    rows, cols = total.shape
    for i in nb.prange(rows):
        for j in range(cols):
            t = np.float64(total[i, j])
            z = np.float64(zero[i, j])
            mod = max(t - z, 0.0) + slack * t  # the modulated part, rounded up
            out[i, j] = np.float32(
                (t + 2.0 * math.sqrt(coherent * mod * z)) * (1.0 + 4.0 * 2.0**-24)
            )


def coherent_zero_order_bound(
    irradiance_mw_per_mm2: np.ndarray, zero_order_mw_per_mm2: np.ndarray, coherent_share: float
) -> np.ndarray:
    """The map with the coherent part of the zero order added at its worst phase.

    Parameters
    ----------
    irradiance_mw_per_mm2 : ndarray
        A predicted map: the modulated light and the zero order added in
        intensity (float32, >= 0).
    zero_order_mw_per_mm2 : ndarray
        The zero order alone on the same grid, at the same laser power
        (:func:`stimplan.holography.propagation.zero_order_irradiance`).
    coherent_share : float
        Share of the zero order's power that can interfere with the modulated
        light, in [0, 1] (:attr:`stimplan.optics.system.OpticalSystem.coherent_zero_share`).

    Returns
    -------
    ndarray, float32
        ``I + 2 sqrt(c (I - I_zero) I_zero)``, with the modulated part
        ``I - I_zero`` rounded up by the float32 round-off of the two maps
        (an upper bound at every sample); the map itself when ``c = 0``.

    References
    ----------
    .. [1] Born & Wolf (1999), §7.2 (two-beam interference).
    """
    c = validate.number("coherent_share", coherent_share, lo=0, hi=1)
    irr = np.ascontiguousarray(irradiance_mw_per_mm2, dtype=np.float32)
    if c == 0.0:
        return irr
    zero = np.ascontiguousarray(zero_order_mw_per_mm2, dtype=np.float32)
    if zero.shape != irr.shape:
        raise ConfigError("zero_order_mw_per_mm2", zero.shape, f"the map's shape {irr.shape}")
    out = np.empty_like(irr)
    # each map is a float32 sum and scaling of float32 terms: a few units of round-off
    _bound(irr, zero, c, 8.0 * _U32, out)
    return out

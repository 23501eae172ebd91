"""Figures of merit of a predicted retinal pattern.

References
----------
.. [1] R. Di Leonardo, F. Ianni and G. Ruocco, *Opt. Express* 15, 1913
   (2007): efficiency and uniformity ``u = 1 - (Imax - Imin)/(Imax + Imin)``.
.. [2] J. W. Goodman, *Speckle Phenomena in Optics*, Roberts & Co. (2007),
   §3.1: speckle contrast ``C = σ_I / <I>``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numba as nb
import numpy as np

from . import validate
from .errors import ConfigError
from .optics.target import resample_coverage

__all__ = [
    "efficiency",
    "uniformity",
    "coefficient_of_variation",
    "speckle_contrast",
    "rms_error",
    "spot_powers",
    "PatternMetrics",
    "pattern_metrics",
]


def efficiency(sample_power_mw: np.ndarray, region: np.ndarray, input_power_mw: float) -> float:
    """Diffraction efficiency: fraction of the laser power that lands in ``region``.

    Parameters
    ----------
    sample_power_mw : ndarray
        Power per retinal sample, mW.
    region : ndarray
        Coverage weights in [0, 1] of the target region, same shape.
    input_power_mw : float
        Laser power on the SLM, mW.

    References
    ----------
    .. [1] Di Leonardo et al. (2007), eq. (6).
    """
    p = validate.number("input_power_mw", input_power_mw, lo=0, lo_open=True)
    _same_shape(sample_power_mw, region)
    return float(np.sum(sample_power_mw * region, dtype=np.float64) / p)


def uniformity(values: np.ndarray) -> float:
    """Uniformity ``1 - (max - min)/(max + min)`` of a set of intensities or powers.

    References
    ----------
    .. [1] Di Leonardo et al. (2007), eq. (7).
    """
    a = np.asarray(values, dtype=np.float64).ravel()
    if a.size == 0:
        raise ConfigError("values", a, "at least one value")
    hi, lo = float(a.max()), float(a.min())
    return 1.0 if hi + lo == 0 else 1.0 - (hi - lo) / (hi + lo)


def coefficient_of_variation(values: np.ndarray) -> float:
    """Standard deviation over mean (``nan`` for a zero mean).

    References
    ----------
    .. [1] J. W. Goodman, *Speckle Phenomena in Optics* (2007), §3.1 (contrast as std/mean).
    """
    a = np.asarray(values, dtype=np.float64).ravel()
    if a.size == 0:
        raise ConfigError("values", a, "at least one value")
    m = a.mean()
    return float(a.std() / m) if m != 0 else float("nan")


def speckle_contrast(irradiance: np.ndarray, region: np.ndarray) -> float:
    """Speckle contrast ``σ/<I>`` over the samples fully inside ``region``.

    References
    ----------
    .. [1] Goodman, *Speckle Phenomena in Optics* (2007), §3.1.
    """
    _same_shape(irradiance, region)
    inside = np.asarray(region) >= 0.999
    if not np.any(inside):
        raise ConfigError("region", "empty", "a region with at least one full sample")
    return coefficient_of_variation(np.asarray(irradiance)[inside])


def rms_error(irradiance: np.ndarray, target: np.ndarray, region: np.ndarray) -> float:
    """Normalised RMS error against a target shape, after the best scale.

    The prediction is scaled by the least-squares factor ``k`` that best fits
    ``target`` over ``region``; the result is ``rms(k I - T) / mean(T)`` over
    the region (samples weighted by their coverage).

    References
    ----------
    .. [1] J. R. Fienup, *Appl. Opt.* 21, 2758 (1982): error metric of
       iterative phase retrieval.
    """
    _same_shape(irradiance, target)
    _same_shape(irradiance, region)

    def flat(a):
        a = np.asarray(a)
        return np.ascontiguousarray(a, dtype=np.float64 if a.dtype == np.float64 else np.float32)

    i, t, w = (flat(a).reshape(-1) for a in (irradiance, target, region))
    s_w, s_wt, s_wit, s_wii = _weighted_moments(i, t, w)
    if s_wii <= 0:
        return float("inf")
    k = s_wit / s_wii
    mean_t = s_wt / s_w if s_w > 0 else 0.0
    if mean_t <= 0:
        raise ConfigError("target", "all zero in region", "a target with light in the region")
    return float(np.sqrt(_weighted_residual(i, t, w, k) / s_w) / mean_t)


@nb.njit(cache=True, nogil=True)
def _weighted_moments(i, t, w):  # pragma: no cover - compiled
    """``sum(w)``, ``sum(w t)``, ``sum(w i t)``, ``sum(w i i)`` in float64."""
    s_w = s_wt = s_wit = s_wii = 0.0
    for k in range(i.size):
        wk = np.float64(w[k])
        if wk != 0.0:
            ik = np.float64(i[k])
            tk = np.float64(t[k])
            s_w += wk
            s_wt += wk * tk
            s_wit += wk * ik * tk
            s_wii += wk * ik * ik
    return s_w, s_wt, s_wit, s_wii


@nb.njit(cache=True, nogil=True)
def _weighted_residual(i, t, w, scale):  # pragma: no cover - compiled
    """``sum(w (scale i - t)²)`` in float64."""
    acc = 0.0
    for k in range(i.size):
        wk = np.float64(w[k])
        if wk != 0.0:
            d = scale * np.float64(i[k]) - np.float64(t[k])
            acc += wk * d * d
    return acc


def spot_powers(
    sample_power_mw: np.ndarray, grid, centres_um: np.ndarray, radius_um: float
) -> np.ndarray:
    """Power inside a disc around each spot centre, mW.

    Parameters
    ----------
    sample_power_mw : ndarray
        Power per sample on ``grid``.
    grid : RetinalGrid
    centres_um : ndarray, shape (n, 2)
        Spot centres ``(x, y)`` in µm.
    radius_um : float
        Integration radius, µm.

    References
    ----------
    .. [1] R. Di Leonardo, F. Ianni and G. Ruocco, *Opt. Express* 15, 1913 (2007) (spot intensities
       of trap arrays).
    """
    r = validate.number("radius_um", radius_um, lo=0, lo_open=True)
    c = np.asarray(centres_um, dtype=np.float64).reshape(-1, 2)
    x, y = grid.coords_um()
    out = np.empty(len(c))
    for n, (cx, cy) in enumerate(c):
        row, col = grid.index_of(cx, cy)
        hr = int(np.ceil(r / grid.pitch_y_um)) + 1
        hc = int(np.ceil(r / grid.pitch_x_um)) + 1
        r0, r1 = max(int(row) - hr, 0), min(int(row) + hr + 2, grid.rows)
        c0, c1 = max(int(col) - hc, 0), min(int(col) + hc + 2, grid.cols)
        sub = sample_power_mw[r0:r1, c0:c1]
        d2 = (x[:, c0:c1] - cx) ** 2 + (y[r0:r1, :] - cy) ** 2
        out[n] = float(np.sum(sub[d2 <= r * r]))
    return out


@dataclass(frozen=True)
class PatternMetrics:
    """Summary figures of a predicted pattern against its target.

    Attributes
    ----------
    efficiency : float
        Fraction of the laser power on the lit target region.
    uniformity : float
        ``1 - (max - min)/(max + min)`` of the irradiance averaged over each
        design sample (the resolution the hologram controls), over the design
        samples of the lit region.
    rms_error : float
        Normalised RMS error of the design-sample irradiance against the
        target, over the lit region dilated by two samples.
    speckle_contrast : float
        ``σ/<I>`` over the lit region at the prediction's full resolution.
    mean_lit_irradiance_mw_per_mm2 : float
        Mean irradiance on the lit region.
    """

    efficiency: float
    uniformity: float
    rms_error: float
    speckle_contrast: float
    mean_lit_irradiance_mw_per_mm2: float

    def as_dict(self) -> dict[str, float]:
        return dict(self.__dict__)


def pattern_metrics(prediction, target, *, lit: np.ndarray | None = None) -> PatternMetrics:
    """All of :class:`PatternMetrics` for a prediction and its target.

    Parameters
    ----------
    prediction : RetinalPrediction
    target : Target
        On the design grid, concentric with the prediction grid.
    lit : ndarray, optional
        ``target.region_on(prediction.grid, "lit")``, if the caller has it.

    References
    ----------
    .. [1] Di Leonardo et al., *Opt. Express* 15, 1913 (2007); J. R. Fienup, *Appl. Opt.* 21, 2758
       (1982); Goodman, *Speckle Phenomena in Optics* (2007), §3.1.
    """

    grid = prediction.grid
    if lit is None:
        lit = target.region_on(grid, "lit")
    irr = prediction.irradiance_mw_per_mm2
    _same_shape(irr, lit)
    s_w, w, n_full, s1_full, s2_full, n_pos, s1_pos, s2_pos = _lit_moments(
        np.ascontiguousarray(irr, dtype=np.float32).reshape(-1),
        np.ascontiguousarray(lit, dtype=np.float32).reshape(-1),
    )
    if n_pos == 0:
        raise ConfigError("target.lit", "empty", "at least one lit sample")
    # the samples wholly inside the lit region, or, if there are none, all lit ones
    cv = (
        _cv_from_moments(n_full, s1_full, s2_full)
        if n_full
        else _cv_from_moments(n_pos, s1_pos, s2_pos)
    )
    coarse = resample_coverage(irr, grid, target.grid)
    lit_d = target.lit
    near = _dilate_l1(np.ascontiguousarray(lit_d, dtype=np.bool_), 2)
    p = validate.number("prediction.power_mw", prediction.power_mw, lo=0, lo_open=True)
    return PatternMetrics(
        efficiency=s_w * grid.sample_area_mm2 / p,
        uniformity=uniformity(coarse[lit_d]),
        rms_error=rms_error(coarse, target.intensity, near),
        speckle_contrast=cv,
        mean_lit_irradiance_mw_per_mm2=s_w / max(w, 1e-12),
    )


@nb.njit(parallel=True, cache=True, nogil=True)
def _lit_moments(irr, lit):  # pragma: no cover - compiled
    """One pass over a map and its lit coverage: ``sum(irr * lit)``, ``sum(lit)``, and
    count, sum and sum of squares of ``irr`` where ``lit >= 0.999`` and where ``lit > 0``
    (float64)."""
    s_w = 0.0
    w = 0.0
    n_full = 0.0
    s1_full = 0.0
    s2_full = 0.0
    n_pos = 0.0
    s1_pos = 0.0
    s2_pos = 0.0
    for i in nb.prange(irr.size):
        li = np.float64(lit[i])
        if li > 0:
            x = np.float64(irr[i])
            s_w += x * li
            w += li
            n_pos += 1.0
            s1_pos += x
            s2_pos += x * x
            if li >= 0.999:
                n_full += 1.0
                s1_full += x
                s2_full += x * x
    return s_w, w, n_full, s1_full, s2_full, n_pos, s1_pos, s2_pos


@nb.njit(cache=True, nogil=True)
def _dilate_l1(mask, radius):  # pragma: no cover - compiled
    """Samples within L1 distance ``radius`` of a set sample (the cross-shaped binary
    dilation iterated ``radius`` times, zero beyond the edges), float32 0/1."""
    rows, cols = mask.shape
    out = np.zeros((rows, cols), dtype=np.float32)
    for i in range(rows):
        for j in range(cols):
            if mask[i, j]:
                for di in range(-radius, radius + 1):
                    a = i + di
                    if a < 0 or a >= rows:
                        continue
                    w = radius - abs(di)
                    for b in range(max(j - w, 0), min(j + w + 1, cols)):
                        out[a, b] = 1.0
    return out


def _cv_from_moments(n: float, s1: float, s2: float) -> float:
    """``σ/<x>`` (population σ) from count, sum and sum of squares."""
    m = s1 / n
    if m == 0:
        return float("nan")
    return float(np.sqrt(max(s2 / n - m * m, 0.0)) / m)


def _same_shape(a, b) -> None:
    if np.shape(a) != np.shape(b):
        raise ConfigError("region", np.shape(b), f"an array of shape {np.shape(a)}")

"""The retinal thermal MPE at the cornea, 700-1200 nm, 1 ns to 3e4 s.

:func:`thermal_limit_j_per_m2` is the vectorised core: the radiant exposure
allowed at the cornea (7 mm aperture) for exposures of duration ``t`` and an
acceptance angle ``alpha``. It is the lower of the two editions described in
:mod:`stimplan.exposure.factors`, row by row:

=================  ====================================  ==================================
t                  2000 edition (Directive, law text)    2014 edition (from memory)
=================  ====================================  ==================================
1 ns - T_a         5e-3 C_A C_E  (T_a = 18 us)           2e-3 C_A C_E  (T_a = 5 us)
T_a - 10 s         18 t^0.75 C_A C_E                     18 t^0.75 C_A C_E
10 s - 3e4 s       E t, E = 18 C_A C_C C_E T2^-0.25 W/m^2 (10 C_A C_C W/m^2 to 1.5 mrad)
=================  ====================================  ==================================

(700-1050 nm; for 1050-1200 nm the rows are 5e-2 C_C C_E to 50 us and
2e-2 C_C C_E to 13 us, then 90 t^0.75 C_C C_E, i.e. the same forms with
C_A = 5.)  From 10 s on, the constant-irradiance form is used for every
alpha, also between 10 s and T2, where the tables give ``18 t**0.75 C_E``:
that form is larger there, so this is the stricter reading. Between 1.5 and
3.6 mrad the constant irradiance is taken as ``min(18 T2**-0.25, 10) C_E``,
which keeps it continuous with the point-source value and errs low by at most
1.2 %.

References
----------
.. [1] Directive 2006/25/EC, Annex II, Tables 2.2, 2.3 and 2.5 (ICNIRP 2000 values).
.. [2] ICNIRP, Health Phys. 105, 271-295 (2013); IEC 60825-1:2014, Annex A, Table A.1.
.. [3] AS/NZS 2211.1:2004, sample calculation: 0.25 s, C_A = 1, small source,
   ``1.8 (0.25)**0.75 mJ/cm^2 = 0.64 mJ/cm^2`` (the t^0.75 row).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .. import validate
from ..cautions import CAUTION_SHORT, CAUTIONS, EDITION
from .factors import (
    ALPHA_MIN_MRAD,
    c_a,
    c_c,
    c_e,
    check_duration,
    check_wavelength,
    t2_s,
)

__all__ = ["thermal_limit_j_per_m2", "governing_edition", "CornealMPE", "corneal_mpe"]

EDITION_2000 = "2000 edition (Directive 2006/25/EC, Annex II)"
EDITION_2014 = "2014 edition (ICNIRP 2013 / IEC 60825-1:2014, from memory)"
_LONG_S = 10.0


def _short_rows(lam: float, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Both editions' rows below 10 s, in J/m^2 per (C_A C_C C_E)."""
    upper = lam >= 1050.0
    # plateau values per C_A C_C (C_A = 5 above 1050 nm: 5e-2 = 5 x 1e-2, 2e-2 = 5 x 4e-3)
    p2000, b2000 = (1e-2, 50e-6) if upper else (5e-3, 18e-6)
    p2014, b2014 = (4e-3, 13e-6) if upper else (2e-3, 5e-6)
    ramp = 18.0 * np.power(t, 0.75)
    return np.where(t < b2000, p2000, ramp), np.where(t < b2014, p2014, ramp)


def _long_irradiance(alpha: Any) -> np.ndarray:
    """Constant irradiance from 10 s on, W/m^2 per (C_A C_C C_E)."""
    return np.minimum(18.0 * np.power(t2_s(alpha), -0.25), 10.0)


def thermal_limit_j_per_m2(wavelength_nm: float, duration_s: Any, alpha_mrad: Any) -> Any:
    """Retinal thermal MPE at the cornea as radiant exposure, J/m^2 (vectorised).

    Parameters
    ----------
    wavelength_nm : float
        700-1200 nm.
    duration_s : float or array_like
        Exposure durations, 1 ns to 3e4 s.
    alpha_mrad : float or array_like
        Angular subtense or acceptance angle, mrad (broadcast with ``duration_s``).

    Returns
    -------
    float or ndarray
        The lower of the two editions' limits (see the module table). It is
        non-decreasing in ``alpha_mrad``, which the bounds over acceptance angles
        rely on.

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Tables 2.2, 2.3, 2.5.
    .. [2] ICNIRP (2013); IEC 60825-1:2014, Annex A (from memory).
    """
    lam = check_wavelength(wavelength_nm)
    t = np.asarray(duration_s, dtype=np.float64)
    if t.size:
        check_duration(float(t.min()), "duration_s")
        check_duration(float(t.max()), "duration_s")
    a = np.asarray(alpha_mrad, dtype=np.float64)
    k = c_a(lam) * c_c(lam) * np.asarray(c_e(a))
    h2000, h2014 = _short_rows(lam, t)
    short = np.minimum(h2000, h2014)
    out = k * np.where(t < _LONG_S, short, _long_irradiance(a) * t)
    return float(out) if out.ndim == 0 else out


def governing_edition(wavelength_nm: float, duration_s: float) -> str:
    """Which edition gives the limit used at this duration (both, where they agree)."""
    lam = check_wavelength(wavelength_nm)
    t = check_duration(duration_s)
    if t >= _LONG_S:
        return "both editions (the stricter reading from 10 s on)"
    h2000, h2014 = (float(x) for x in _short_rows(lam, np.asarray(t)))
    if abs(h2000 - h2014) <= 1e-12 * max(h2000, h2014):
        return "both editions"
    return EDITION_2014 if h2014 < h2000 else EDITION_2000


@dataclass(frozen=True)
class CornealMPE:
    """The retinal thermal MPE at the cornea for one exposure (7 mm aperture).

    Attributes
    ----------
    radiant_exposure_j_per_m2, irradiance_w_per_m2 : float
        The limit, and the same as a mean irradiance over the duration.
    c_a, c_c, c_e, t2_s : float
        The factors used.
    governing : str
        Which edition gives the value (the lower one is used).
    """

    wavelength_nm: float
    duration_s: float
    alpha_mrad: float
    radiant_exposure_j_per_m2: float
    irradiance_w_per_m2: float
    c_a: float
    c_c: float
    c_e: float
    t2_s: float
    governing: str
    hazard: str = "thermal"
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    def summary(self) -> str:
        """The figures, the edition and :data:`stimplan.cautions.CAUTIONS`."""
        return "\n".join(
            [
                f"MPE at the cornea, {self.wavelength_nm:g} nm, {self.duration_s:.4g} s, "
                f"alpha = {self.alpha_mrad:g} mrad ({self.edition})",
                f"  {self.radiant_exposure_j_per_m2:.4g} J/m² = {self.irradiance_w_per_m2:.4g} "
                f"W/m² mean, retinal thermal limit of the {self.governing}",
                f"  C_A = {self.c_a:.4g}, C_C = {self.c_c:.4g}, C_E = {self.c_e:.4g}, "
                f"T2 = {self.t2_s:.4g} s",
                CAUTIONS,
            ]
        )


def corneal_mpe(wavelength_nm: float, duration_s: float, alpha_mrad: float) -> CornealMPE:
    """Maximum permissible exposure at the cornea for the retinal thermal hazard.

    Parameters
    ----------
    wavelength_nm : float
        700-1200 nm (other wavelengths are refused with a ConfigError).
    duration_s : float
        1 ns to 3e4 s (shorter exposures are refused).
    alpha_mrad : float
        Angular subtense of the source, >= 0 (below 1.5 mrad it counts as 1.5).

    Returns
    -------
    CornealMPE

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Tables 2.2, 2.3, 2.5.
    .. [2] ICNIRP (2013); IEC 60825-1:2014, Annex A (from memory).
    """
    lam = check_wavelength(wavelength_nm)
    t = check_duration(duration_s)
    a = validate.number("alpha_mrad", alpha_mrad, lo=0.0)
    h = thermal_limit_j_per_m2(lam, t, a)
    return CornealMPE(
        wavelength_nm=lam,
        duration_s=t,
        alpha_mrad=a,
        radiant_exposure_j_per_m2=h,
        irradiance_w_per_m2=h / t,
        c_a=c_a(lam),
        c_c=c_c(lam),
        c_e=c_e(max(a, ALPHA_MIN_MRAD)),
        t2_s=t2_s(a),
        governing=governing_edition(lam, t),
    )

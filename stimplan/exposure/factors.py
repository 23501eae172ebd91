"""Correction factors and breakpoints of the retinal thermal limits, 700-1200 nm.

Each factor is one function that takes a scalar or an array, checks its range
and returns a float or an array of the same shape.

Which values, and why
---------------------
Two editions of the limits are combined, and wherever they differ the more
conservative value is used:

* the 2000 edition (ICNIRP 2000 / IEC 60825-1:2001), published as law text in
  Directive 2006/25/EC, Annex II, Tables 2.2, 2.3, 2.5 and 2.6 [1]_;
* the 2013/2014 edition (ICNIRP 2013 [2]_, IEC 60825-1:2014, Annex A [3]_),
  whose breakpoints are entered **from memory** of copies of its tables (the
  full text was not at hand).

The factors here are those of the 2000 edition where they are the stricter:
``C_E = alpha / alpha_min`` up to ``alpha_max = 100 mrad`` for every duration
(the 2014 edition's time-dependent alpha_max only ever makes C_E larger), and
``C_P = N**-0.25`` with no floor (the 2014 edition's C5 is never smaller).

Supported range: 700-1200 nm and exposures of 1 ns to 3e4 s. Below 700 nm the
visible-light limits apply (photochemical up to 600 nm), above 1200 nm the
cornea and lens become the limiting tissues, and below 1 ns the editions disagree by up to 5x; those
regimes are refused (:class:`stimplan.errors.ConfigError`), not approximated.

References
----------
.. [1] Directive 2006/25/EC of the European Parliament and of the Council
   (artificial optical radiation), Annex II, Tables 2.2-2.6.
.. [2] ICNIRP, "Guidelines on limits of exposure to laser radiation of
   wavelengths between 180 nm and 1,000 um", Health Phys. 105, 271-295 (2013).
.. [3] IEC 60825-1:2014, Safety of laser products - Part 1, Annex A.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import validate
from ..errors import ConfigError

__all__ = [
    "WAVELENGTH_MIN_NM",
    "WAVELENGTH_MAX_NM",
    "DURATION_MIN_S",
    "DURATION_MAX_S",
    "ALPHA_MIN_MRAD",
    "ALPHA_MAX_MRAD",
    "check_wavelength",
    "check_duration",
    "c_a",
    "c_c",
    "c_e",
    "t2_s",
    "grouping_times_s",
    "c_p",
]

#: Wavelengths supported: the near infrared where only the retinal thermal limits apply.
WAVELENGTH_MIN_NM = 700.0
WAVELENGTH_MAX_NM = 1200.0
#: Shortest exposure supported (sub-ns rows of the editions differ by up to 5x) and the
#: longest duration of the tables.
DURATION_MIN_S = 1e-9
DURATION_MAX_S = 3e4
#: Smallest angular subtense (both editions).
ALPHA_MIN_MRAD = 1.5
#: Largest angular subtense of the 2000 edition, for every duration (Directive
#: 2006/25/EC, Table 2.5); the acceptance angles run from ALPHA_MIN_MRAD to here.
ALPHA_MAX_MRAD = 100.0


def check_wavelength(value: Any, field: str = "wavelength_nm") -> float:
    """A wavelength in the supported range, or a :class:`ConfigError` saying why not."""
    lam = validate.number(field, value)
    if lam < WAVELENGTH_MIN_NM or lam > WAVELENGTH_MAX_NM:
        why = (
            "below 700 nm the visible-light limits (photochemical up to 600 nm, C_A = 1) "
            "are not implemented"
            if lam < WAVELENGTH_MIN_NM
            else "above 1200 nm the cornea and lens limit the exposure and their limits "
            "are not implemented"
        )
        raise ConfigError(field, value, f"[{WAVELENGTH_MIN_NM:g}, {WAVELENGTH_MAX_NM:g}] nm", why)
    return lam


def check_duration(value: Any, field: str = "duration_s") -> float:
    """An exposure duration in the supported range (1 ns to 3e4 s)."""
    t = validate.number(field, value, lo=0.0, lo_open=True)
    if t < DURATION_MIN_S * (1 - 1e-12) or t > DURATION_MAX_S:
        why = (
            "exposures under 1 ns are not supported: the published editions disagree there"
            if t < DURATION_MIN_S
            else "the tables end at 3e4 s"
        )
        raise ConfigError(field, value, f"[{DURATION_MIN_S:g}, {DURATION_MAX_S:g}] s", why)
    return t


def _array_in(name: str, value: Any, lo: float, hi: float | None = None) -> np.ndarray:
    arr = np.asarray(value, dtype=np.float64)
    if arr.size and (
        not np.all(np.isfinite(arr)) or np.any(arr < lo) or (hi is not None and np.any(arr > hi))
    ):
        bad = arr[~np.isfinite(arr) | (arr < lo) | ((arr > hi) if hi is not None else False)]
        rng = f"[{lo:g}, {hi:g}]" if hi is not None else f">= {lo:g}"
        raise ConfigError(name, float(bad.flat[0]), rng)
    return arr


def _out(x: np.ndarray, like: Any) -> Any:
    return float(x) if np.ndim(like) == 0 else x


def c_a(wavelength_nm: Any) -> Any:
    """Correction factor C_A (IEC: C4).

    Parameters
    ----------
    wavelength_nm : float or array_like
        700-1200 nm.

    Returns
    -------
    float or ndarray
        ``10**(0.002 (lambda - 700))`` for 700-1050 nm and 5 for 1050-1200 nm
        (the same in both editions).

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Table 2.5.
    """
    lam = _array_in("wavelength_nm", wavelength_nm, WAVELENGTH_MIN_NM, WAVELENGTH_MAX_NM)
    return _out(np.where(lam < 1050.0, 10.0 ** (0.002 * (lam - 700.0)), 5.0), wavelength_nm)


def c_c(wavelength_nm: Any) -> Any:
    """Correction factor C_C (IEC: C7), water absorption.

    Returns
    -------
    float or ndarray
        1 for 700-1150 nm and ``10**(0.018 (lambda - 1150))`` for 1150-1200 nm.

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Table 2.5.
    """
    lam = _array_in("wavelength_nm", wavelength_nm, WAVELENGTH_MIN_NM, WAVELENGTH_MAX_NM)
    return _out(np.where(lam < 1150.0, 1.0, 10.0 ** (0.018 * (lam - 1150.0))), wavelength_nm)


def c_e(alpha_mrad: Any) -> Any:
    """Extended-source factor C_E, the more conservative of the two editions.

    Parameters
    ----------
    alpha_mrad : float or array_like
        Angular subtense or acceptance angle, mrad, >= 0.

    Returns
    -------
    float or ndarray
        1 below alpha_min = 1.5 mrad, ``alpha / alpha_min`` up to 100 mrad and
        ``alpha**2 / (alpha_min * 100 mrad)`` beyond.

    Notes
    -----
    The 2014 edition makes alpha_max depend on the duration (from memory: 5 mrad
    below 625 us, ``200 t**0.5`` mrad up to 0.25 s); above its alpha_max it
    grows as alpha squared, so it is never below this one.

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Table 2.5.
    """
    a = _array_in("alpha_mrad", alpha_mrad, 0.0)
    out = np.where(
        a <= ALPHA_MIN_MRAD,
        1.0,
        np.where(
            a <= ALPHA_MAX_MRAD, a / ALPHA_MIN_MRAD, a * a / (ALPHA_MIN_MRAD * ALPHA_MAX_MRAD)
        ),
    )
    return _out(out, alpha_mrad)


def t2_s(alpha_mrad: Any) -> Any:
    """T2, the time from which the thermal limit is a constant irradiance.

    Returns
    -------
    float or ndarray
        10 s up to 1.5 mrad, ``10 * 10**((alpha - 1.5) / 98.5)`` s up to 100 mrad
        and 100 s beyond (both editions).

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Table 2.5.
    """
    a = np.clip(_array_in("alpha_mrad", alpha_mrad, 0.0), ALPHA_MIN_MRAD, ALPHA_MAX_MRAD)
    return _out(10.0 * 10.0 ** ((a - ALPHA_MIN_MRAD) / 98.5), alpha_mrad)


def grouping_times_s(wavelength_nm: float) -> tuple[float, float]:
    """Times within which pulses count as one for rule 3, ``(2000 edition, 2014 edition)``.

    Returns
    -------
    tuple of float
        18 us and 5 us for 700-1050 nm; 50 us and 13 us for 1050-1200 nm. The
        2014 values are from memory. Neither grouping is always the stricter, so
        rule 3 is evaluated with both.

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Table 2.6 (T_min).
    .. [2] IEC 60825-1:2014, Annex A (T_i; from memory).
    """
    lam = check_wavelength(wavelength_nm)
    return (18e-6, 5e-6) if lam < 1050.0 else (50e-6, 13e-6)


def c_p(n_pulses: Any) -> Any:
    """Repeated-pulse factor ``C_P = N**-0.25`` of rule 3, with no floor.

    Parameters
    ----------
    n_pulses : int or array_like
        Number of pulses (after grouping), >= 1.

    Notes
    -----
    This is the Directive's rule 3 ("N is the number of pulses"), applied with N
    the number of pulses of the whole assessed sequence. The 2014 edition's C5
    (no reduction for small sources and long pulses, floors of 0.4 and 0.2, N
    counted within T2) is never smaller, so it never binds.

    References
    ----------
    .. [1] Directive 2006/25/EC, Annex II, Table 2.6, rule 3.
    """
    n = _array_in("n_pulses", n_pulses, 1.0)
    return _out(n**-0.25, n_pulses)

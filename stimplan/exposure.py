"""Retinal exposure limits of the laser-safety standards, applied to a planned stimulus.

What this module does
---------------------
* :func:`corneal_mpe` gives the maximum permissible exposure (MPE) at the
  cornea for the retinal hazard region, 400-1400 nm, for one exposure of
  duration 1e-13 s to 3e4 s and a source of angular subtense ``alpha_mrad``:
  the retinal thermal limits and, for 400-600 nm and t > 10 s, the
  photochemical limits; the lower one binds. The small functions
  :func:`c_a`, :func:`c_b`, :func:`c_c`, :func:`alpha_max_mrad`, :func:`c_e`,
  :func:`t2_s`, :func:`t_i_s`, :func:`c_p` and :func:`photochemical_gamma_mrad`
  hold the correction factors.
* :func:`evaluate_train` applies the three rules for repeated exposure
  (single pulse, average power over any group of pulses, repeated-pulse
  thermal reduction ``C_P``) to a timeline of :class:`Pulse` objects at one
  retinal location and one acceptance angle.
* :func:`disc_power_map` and :func:`max_disc_power` integrate a predicted
  retinal irradiance map over discs of a given angular diameter (FFT
  convolution with an area-weighted disc), the core of the
  varying-acceptance-angle method for extended sources; long sequences of
  large maps use the exact disc sums and the search of
  :mod:`stimplan.disc_search`.
* :func:`assess_sequence` evaluates a whole sequence of frames (irradiance
  maps and their pulses) against every rule at a set of acceptance angles,
  builds the dose and peak-irradiance maps, and gives a verdict, optionally
  beside a protocol cap (:class:`ProtocolCap`) of the user's own.
  :func:`evaluate_map` is the single-exposure case.
* :func:`plan_power` and :func:`compare_power` use the linearity in laser
  power to find the power needed for a target irradiance and the largest
  power that stays within every rule, for a hologram and an amplitude-mask
  baseline side by side.

Which edition
-------------
The numbers follow :data:`EDITION`: ICNIRP 2013 and IEC 60825-1:2014. The
structure of the correction factors is published (it is reproduced by
Directive 2006/25/EC, Annex II, for the earlier edition); the 2013/2014
breakpoints and values were written **from memory of the tables** and must be
checked against the full text before anyone relies on them. Every result
carries the edition and :data:`stimplan.cautions.CAUTIONS`.

The basis of comparison
-----------------------
The limits are corneal: radiant exposure (J/m^2) or irradiance (W/m^2)
averaged over the 7 mm limiting aperture. stimplan predicts the retina, so the
limits are converted to the retina through an eye model (:class:`EyeModel`):
the retinal image of an acceptance angle ``alpha`` has diameter
``d = alpha * f_eye`` (1 mrad x 1 mm = 1 um), the power into the eye is
``P = E * A_7mm`` and the retinal irradiance is ``tau * P / (pi d^2 / 4)``.
The standards are written for the human eye. For an animal eye the limits are
still converted through the human reference eye (f = 17 mm and the human
ocular transmission, :data:`HUMAN_EYE`), and the predicted animal retina is
compared with them on that basis: an acceptance angle is a disc of diameter
``alpha * 17 mm`` on the predicted retina. Every result states this in its
``basis`` text.

Units: times in the public timeline API are milliseconds (``_ms``), exposure
durations of the MPE functions are seconds (``_s``), retinal irradiance is
mW/mm^2, retinal power mW, retinal energy mJ and dose mJ/mm^2.
"""

from __future__ import annotations

import math
import weakref
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field, replace
from functools import lru_cache
from typing import Any

import numba as nb
import numpy as np
import scipy.fft as sfft

from . import _validate as v
from .cautions import CAUTION_SHORT, CAUTIONS, EDITION, EDITION_SHORT
from .disc_search import DiscSums, Pooled, kernel_half, prefix_sums, search_max
from .disc_search import disc_kernel as _disc_kernel
from .errors import ConfigError
from .grid import RetinalGrid

__all__ = [
    "EDITION",
    "EDITION_SHORT",
    "CAUTIONS",
    "CAUTION_SHORT",
    "WAVELENGTH_MIN_NM",
    "WAVELENGTH_MAX_NM",
    "DURATION_MIN_S",
    "DURATION_MAX_S",
    "ALPHA_MIN_MRAD",
    "LIMITING_APERTURE_MM",
    "LIMITING_APERTURE_AREA_M2",
    "HUMAN_FOCAL_LENGTH_MM",
    "HUMAN_OCULAR_TRANSMISSION",
    "RULES",
    "EyeModel",
    "HUMAN_EYE",
    "c_a",
    "c_b",
    "c_c",
    "alpha_max_mrad",
    "c_e",
    "t2_s",
    "t_i_s",
    "c_p",
    "photochemical_gamma_mrad",
    "CornealMPE",
    "corneal_mpe",
    "retinal_image_diameter_um",
    "power_into_eye_mw",
    "retinal_irradiance_mw_per_mm2",
    "retinal_power_limit_mw",
    "Pulse",
    "periodic_pulses",
    "RuleResult",
    "TrainAssessment",
    "evaluate_train",
    "disc_power_map",
    "max_disc_power",
    "default_acceptance_angles_mrad",
    "Frame",
    "ProtocolCap",
    "ProtocolResult",
    "AngleResult",
    "ExposureAssessment",
    "assess_sequence",
    "evaluate_map",
    "PerMilliwatt",
    "PowerPlan",
    "PowerComparison",
    "plan_power",
    "compare_power",
]

# --------------------------------------------------------------------------
# Constants
# --------------------------------------------------------------------------

WAVELENGTH_MIN_NM = 400.0
WAVELENGTH_MAX_NM = 1400.0
#: Shortest and longest exposure durations of the tables (IEC 60825-1:2014, Annex A).
DURATION_MIN_S = 1e-13
DURATION_MAX_S = 3e4
#: Smallest angular subtense: a smaller source is treated as alpha_min (published).
ALPHA_MIN_MRAD = 1.5
#: Limiting aperture for the retinal hazard region, 400-1400 nm (published).
LIMITING_APERTURE_MM = 7.0
LIMITING_APERTURE_AREA_M2 = math.pi * (LIMITING_APERTURE_MM * 1e-3 / 2) ** 2
#: Focal length of the human reference eye used to turn angles into retinal
#: sizes (the usual 17 mm of laser-safety texts).
HUMAN_FOCAL_LENGTH_MM = 17.0
#: Transmission of the human ocular media used to convert corneal limits into
#: retinal ones. Source: Boettner & Wolter, Invest. Ophthalmol. 1, 776 (1962),
#: total transmission peaks at about 0.84 between 650 and 850 nm; about 0.8 at
#: 880-905 nm is an estimate (from memory). 0.8 is slightly below the peak, so
#: in 650-1050 nm it errs towards lower (stricter) retinal limits. It is not a
#: good value at the blue end or above 1150 nm: pass your own EyeModel there.
HUMAN_OCULAR_TRANSMISSION = 0.8

# Breakpoints of the tables (IEC 60825-1:2014 / ICNIRP 2013, from memory).
_T_SUBNS_END_S = 1e-11
_T_NS_END_S = {False: 5e-6, True: 13e-6}  # key: wavelength >= 1050 nm
_T_ALPHA_MAX_1_S = 625e-6
_T_ALPHA_MAX_2_S = 0.25
_PHOTOCHEM_MAX_NM = 600.0
_PHOTOCHEM_MIN_S = 10.0
_CP_NO_REDUCTION_MRAD = 5.0
_CP_FLOOR_TO_ALPHA_MAX = 0.4
_CP_FLOOR_ABOVE_ALPHA_MAX = 0.2

#: The three rules for repeated exposure, in the order they are reported.
RULES = ("single_pulse", "average_power", "repeated_pulse")
_RULE_LABELS = {
    "single_pulse": "rule 1, single pulse",
    "average_power": "rule 2, average power over any group of pulses",
    "repeated_pulse": "rule 3, repeated-pulse thermal reduction C_P",
}

# Windows of rule 2: every window for trains up to this many (grouped) pulses.
_EXACT_WINDOW_MAX = 2000
_WINDOW_EXACT_SPAN = 512
_WINDOW_STEP = 1.02
# Pulses dimmer than this fraction of the brightest pulse at a location are not
# counted as pulses for rules 1 and 3 (their energy still counts in rule 2).
_COUNT_THRESHOLD = 1e-4
_TIME_TOL_S = 1e-9
# assess_sequence: per-angle accumulators held at once (more angles take more passes), and
# the samples per chunk of its elementwise accumulations.
#: Maps of more samples than this find each disc-power maximum by a coarse-to-fine
#: search (:func:`stimplan.disc_search.search_max`); smaller ones by a full FFT map.
_SEARCH_MIN_SAMPLES = 1 << 20


# --------------------------------------------------------------------------
# Eye model
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class EyeModel:
    """The eye through which corneal limits are turned into retinal ones.

    Parameters
    ----------
    focal_length_mm : float
        Posterior nodal distance; an angle of 1 mrad is ``focal_length_mm`` um
        on the retina.
    transmission : float
        Transmission of the ocular media, in (0, 1].
    name : str
        Shown in the ``basis`` text of results.
    source : str
        Where the numbers come from.
    """

    focal_length_mm: float = HUMAN_FOCAL_LENGTH_MM
    transmission: float = HUMAN_OCULAR_TRANSMISSION
    name: str = "human reference eye"
    source: str = (
        "f = 17 mm (laser-safety convention); tau = 0.8 near 880 nm, estimate after "
        "Boettner & Wolter 1962 (from memory)"
    )

    def __post_init__(self) -> None:
        object.__setattr__(
            self,
            "focal_length_mm",
            v.number("eye.focal_length_mm", self.focal_length_mm, lo=0, lo_open=True),
        )
        object.__setattr__(
            self,
            "transmission",
            v.number("eye.transmission", self.transmission, lo=0, hi=1, lo_open=True),
        )

    def image_diameter_um(self, alpha_mrad: float) -> float:
        """Retinal diameter of an angle, ``alpha * f`` in micrometres."""
        return float(alpha_mrad) * self.focal_length_mm

    def describe(self) -> str:
        return f"the {self.name} (f = {self.focal_length_mm:g} mm, tau = {self.transmission:g})"


#: The human reference eye: 17 mm, ocular transmission 0.8.
HUMAN_EYE = EyeModel()


def _check_eye(eye: Any) -> EyeModel:
    if not isinstance(eye, EyeModel):
        raise ConfigError("eye", eye, "an EyeModel (e.g. stimplan.exposure.HUMAN_EYE)")
    return eye


def _basis_text(eye: EyeModel, subject: str | None) -> str:
    text = (
        "Limits at the cornea (7 mm limiting aperture), converted to the retina through "
        f"{eye.describe()}: an acceptance angle alpha is a disc of diameter "
        f"alpha x {eye.focal_length_mm:g} mm on the predicted retina, and a corneal limit E "
        "is a retinal power tau x E x A(7 mm)."
    )
    human = eye.focal_length_mm == HUMAN_FOCAL_LENGTH_MM and eye.name.startswith("human")
    if subject and subject.strip().lower() not in ("human", "human eye"):
        text += (
            f" The stimulus is planned for a {subject} eye; the standards are written for "
            f"the human eye, so the predicted {subject} retina is compared with the "
            "human-eye equivalent of the limits (retinal irradiance and retinal image size "
            "through the human eye), not with limits scaled to the animal eye."
        )
    elif not subject:
        text += (
            " If the prediction is for an animal eye, this comparison is on that human-eye "
            "basis (the standards are written for the human eye)."
        )
    if not human:
        text += f" Note: a non-default eye model was used ({eye.source})."
    return text


# --------------------------------------------------------------------------
# Validators
# --------------------------------------------------------------------------


def _wavelength(value: Any, field: str = "wavelength_nm") -> float:
    return v.number(field, value, lo=WAVELENGTH_MIN_NM, hi=WAVELENGTH_MAX_NM)


def _duration(value: Any, field: str = "duration_s") -> float:
    return v.number(field, value, lo=DURATION_MIN_S, hi=DURATION_MAX_S)


def _alpha(value: Any, field: str = "alpha_mrad") -> float:
    return v.number(field, value, lo=0.0)


# --------------------------------------------------------------------------
# Correction factors
# --------------------------------------------------------------------------


def c_a(wavelength_nm: float) -> float:
    """Correction factor C_A of the retinal thermal limits.

    Parameters
    ----------
    wavelength_nm : float
        Wavelength, 400-1400 nm.

    Returns
    -------
    float
        1 below 700 nm, ``10**(0.002 (lambda - 700))`` for 700-1050 nm and 5
        for 1050-1400 nm.

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A (C4 in the
    AEL tables); Directive 2006/25/EC, Annex II, Table 2.5.
    """
    return _c_a_raw(_wavelength(wavelength_nm))


def c_b(wavelength_nm: float) -> float:
    """Correction factor C_B of the photochemical (blue-light) limits.

    Parameters
    ----------
    wavelength_nm : float
        Wavelength, 400-700 nm (the limits use it up to 600 nm).

    Returns
    -------
    float
        1 for 400-450 nm, ``10**(0.02 (lambda - 450))`` for 450-700 nm.

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A (C3);
    Directive 2006/25/EC, Annex II, Table 2.5.
    """
    lam = v.number("wavelength_nm", wavelength_nm, lo=400.0, hi=700.0)
    if lam < 450.0:
        return 1.0
    return 10.0 ** (0.02 * (lam - 450.0))


def c_c(wavelength_nm: float) -> float:
    """Correction factor C_C of the retinal thermal limits (water absorption).

    Parameters
    ----------
    wavelength_nm : float
        Wavelength, 400-1400 nm.

    Returns
    -------
    float
        1 below 1150 nm, ``10**(0.018 (lambda - 1150))`` for 1150-1200 nm and
        ``8 + 10**(0.04 (lambda - 1250))`` for 1200-1400 nm.

    Notes
    -----
    The 1200-1400 nm branch is the 2014 form as remembered (from memory); the
    earlier edition (Directive 2006/25/EC) has a constant 8 there, which is
    stricter.

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A (C7).
    """
    lam = _wavelength(wavelength_nm)
    if lam < 1150.0:
        return 1.0
    if lam < 1200.0:
        return 10.0 ** (0.018 * (lam - 1150.0))
    return 8.0 + 10.0 ** (0.04 * (lam - 1250.0))


def alpha_max_mrad(duration_s: float) -> float:
    """The time-dependent largest angular subtense alpha_max of the 2014 edition.

    Parameters
    ----------
    duration_s : float
        Exposure duration, 1e-13 to 3e4 s.

    Returns
    -------
    float
        5 mrad for t < 625 us, ``200 t**0.5`` mrad from 625 us to 0.25 s and
        100 mrad beyond (from memory; continuous at both breakpoints).

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A.
    """
    return float(_alpha_max_v(_duration(duration_s)))


def c_e(alpha_mrad: float, duration_s: float) -> float:
    """Extended-source correction factor C_E.

    Parameters
    ----------
    alpha_mrad : float
        Angular subtense of the source (or acceptance angle), mrad, >= 0.
    duration_s : float
        Exposure duration, s; it sets alpha_max (:func:`alpha_max_mrad`).

    Returns
    -------
    float
        1 for alpha <= alpha_min = 1.5 mrad, ``alpha / alpha_min`` up to
        alpha_max, and ``alpha**2 / (alpha_min alpha_max)`` above it.

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A (C6);
    structure as in Directive 2006/25/EC, Annex II, Table 2.5.
    """
    a = _alpha(alpha_mrad)
    amax = _alpha_max_v(_duration(duration_s))
    return float(_c_e_v(a, amax))


def t2_s(alpha_mrad: float) -> float:
    """T2, the time beyond which the thermal limit is a constant irradiance.

    Parameters
    ----------
    alpha_mrad : float
        Angular subtense, mrad, >= 0.

    Returns
    -------
    float
        10 s for alpha <= 1.5 mrad, ``10 * 10**((alpha - 1.5) / 98.5)`` s up to
        100 mrad and 100 s beyond.

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A;
    Directive 2006/25/EC, Annex II, Table 2.5.
    """
    return _t2(_alpha(alpha_mrad))


def t_i_s(wavelength_nm: float) -> float:
    """T_i, the time within which pulses are counted as one (thermal rule 3).

    Parameters
    ----------
    wavelength_nm : float
        Wavelength, 400-1400 nm.

    Returns
    -------
    float
        5 us for 400-1050 nm and 13 us for 1050-1400 nm (2014 edition, from
        memory; the earlier edition had 18 us and 50 us).

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A.
    """
    lam = _wavelength(wavelength_nm)
    return _T_NS_END_S[lam >= 1050.0]


def c_p(n_pulses: int, alpha_mrad: float, pulse_duration_s: float) -> float:
    """Repeated-pulse reduction factor C_P of the retinal thermal limits.

    Parameters
    ----------
    n_pulses : int
        Number of (grouped) pulses, >= 1.
    alpha_mrad : float
        Angular subtense, mrad.
    pulse_duration_s : float
        Duration of the single (grouped) pulse; it sets alpha_max.

    Returns
    -------
    float
        1 for alpha <= 5 mrad; ``max(N**-0.25, 0.4)`` for 5 mrad < alpha <=
        alpha_max; ``max(N**-0.25, 0.2)`` above alpha_max (2014 edition, from
        memory: N**-0.25 reaches 0.4 at N = 40 and 0.2 at N = 625).

    Notes
    -----
    An exemption of pulses longer than 0.25 s, which some texts give, is not
    applied (stricter).

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A (C5).
    """
    n = v.integer("n_pulses", n_pulses, lo=1)
    a = _alpha(alpha_mrad)
    t = _duration(pulse_duration_s, "pulse_duration_s")
    return float(_c_p_v(np.asarray(float(n)), a, np.asarray(t)))


def photochemical_gamma_mrad(duration_s: float) -> float:
    """Limiting cone angle gamma_ph of the photochemical limits.

    Parameters
    ----------
    duration_s : float
        Exposure duration, s.

    Returns
    -------
    float
        11 mrad up to 100 s, ``1.1 t**0.5`` mrad from 100 s to 1e4 s, 110 mrad
        beyond. The photochemical limit applies to the irradiance averaged over
        this field of view; a larger source counts only with the part within it.

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A;
    Directive 2006/25/EC, Annex II, Table 2.5.
    """
    t = _duration(duration_s)
    return _gamma_ph(t)


# Vectorised internals (no validation). -------------------------------------


def _c_a_raw(lam: float) -> float:
    if lam < 700.0:
        return 1.0
    if lam <= 1050.0:  # the formula gives 5.01 at 1050 nm, the table 5 beyond
        return 10.0 ** (0.002 * (lam - 700.0))
    return 5.0


def _c_c_raw(lam: float) -> float:
    if lam < 1150.0:
        return 1.0
    if lam < 1200.0:
        return 10.0 ** (0.018 * (lam - 1150.0))
    return 8.0 + 10.0 ** (0.04 * (lam - 1250.0))


def _c_b_raw(lam: float) -> float:
    return 1.0 if lam < 450.0 else 10.0 ** (0.02 * (lam - 450.0))


def _alpha_max_v(t: Any) -> np.ndarray:
    t = np.asarray(t, dtype=np.float64)
    return np.where(
        t < _T_ALPHA_MAX_1_S, 5.0, np.where(t <= _T_ALPHA_MAX_2_S, 200.0 * np.sqrt(t), 100.0)
    )


def _c_e_v(alpha: float, amax: np.ndarray) -> np.ndarray:
    amax = np.asarray(amax, dtype=np.float64)
    if alpha <= ALPHA_MIN_MRAD:
        return np.ones_like(amax)
    return np.where(alpha <= amax, alpha / ALPHA_MIN_MRAD, alpha * alpha / (ALPHA_MIN_MRAD * amax))


def _t2(alpha: float) -> float:
    a = min(max(alpha, ALPHA_MIN_MRAD), 100.0)
    return 10.0 * 10.0 ** ((a - ALPHA_MIN_MRAD) / 98.5)


def _gamma_ph(t: float) -> float:
    if t <= 100.0:
        return 11.0
    if t <= 1e4:
        return 1.1 * math.sqrt(t)
    return 110.0


def _c_p_v(n: np.ndarray, alpha: float, t: np.ndarray) -> np.ndarray:
    n = np.asarray(n, dtype=np.float64)
    t = np.asarray(t, dtype=np.float64)
    if alpha <= _CP_NO_REDUCTION_MRAD:
        return np.ones(np.broadcast(n, t).shape)
    base = n**-0.25
    within = alpha <= _alpha_max_v(t) * (1 + 1e-9)  # "alpha <= alpha_max", robust to round-off
    floor = np.where(within, _CP_FLOOR_TO_ALPHA_MAX, _CP_FLOOR_ABOVE_ALPHA_MAX)
    return np.maximum(base, floor)


def _thermal_h(lam: float, t: Any, alpha: float) -> np.ndarray:
    """Retinal thermal MPE, radiant exposure at the cornea in J/m^2 (vectorised in t).

    IEC 60825-1:2014 / ICNIRP 2013 as remembered (from memory):

    ============  ==========================  ==============================
    t             400-1050 nm                 1050-1400 nm
    ============  ==========================  ==============================
    1e-13-1e-11   1e-3 C_A C_E                1e-2 C_C C_E
    1e-11-t_b     2e-3 C_A C_E (t_b = 5 us)   2e-2 C_C C_E (t_b = 13 us)
    t_b-T2        18 C_A C_C C_E t^0.75       (90 = 18 x C_A with C_A = 5)
    > T2          E = 18 C_A C_C C_E T2^-0.25 W/m^2; 10 C_A C_C W/m^2 if alpha <= 1.5
    ============  ==========================  ==============================
    """
    t = np.asarray(t, dtype=np.float64)
    ca, cc = _c_a_raw(lam), _c_c_raw(lam)
    ce = _c_e_v(alpha, _alpha_max_v(t))
    t2 = _t2(alpha)
    upper = lam >= 1050.0
    t_b = _T_NS_END_S[upper]
    h_fs, h_ns = (1e-2 * cc, 2e-2 * cc) if upper else (1e-3 * ca, 2e-3 * ca)
    h_mid = 18.0 * ca * cc * ce * np.power(t, 0.75)
    if alpha <= ALPHA_MIN_MRAD:
        e_long = 10.0 * ca * cc * np.ones_like(ce)
    else:
        e_long = 18.0 * ca * cc * ce * t2**-0.25
    return np.where(
        t < _T_SUBNS_END_S,
        h_fs * ce,
        np.where(t < t_b, h_ns * ce, np.where(t <= t2, h_mid, e_long * t)),
    )


def _photochemical_h(lam: float, t: Any) -> np.ndarray:
    """Photochemical MPE in J/m^2 at the cornea, over gamma_ph; inf where it does not apply.

    400-600 nm, t > 10 s: 100 C_B J/m^2 up to 100 s, then 1 C_B W/m^2 (from memory).
    """
    t = np.asarray(t, dtype=np.float64)
    if lam >= _PHOTOCHEM_MAX_NM:
        return np.full(t.shape, np.inf)
    cb = _c_b_raw(lam)
    return np.where(t <= _PHOTOCHEM_MIN_S, np.inf, np.where(t <= 100.0, 100.0 * cb, cb * t))


def _photochemical_applies(lam: float, t: float) -> bool:
    return lam < _PHOTOCHEM_MAX_NM and t > _PHOTOCHEM_MIN_S


def _regime(lam: float, t: float, alpha: float) -> str:
    t_b = _T_NS_END_S[lam >= 1050.0]
    if t < _T_SUBNS_END_S:
        return "sub-ns regime, 1e-13 to 1e-11 s (2014 table, from memory)"
    if t < t_b:
        return f"ns regime, 1e-11 s to {t_b * 1e6:g} us (2014 table, from memory)"
    if t <= _t2(alpha):
        return f"t^0.75 regime, {t_b * 1e6:g} us to T2 = {_t2(alpha):.3g} s"
    return f"constant irradiance beyond T2 = {_t2(alpha):.3g} s"


# --------------------------------------------------------------------------
# Corneal MPE
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class CornealMPE:
    """The MPE at the cornea for one exposure (7 mm aperture).

    Attributes
    ----------
    radiant_exposure_j_per_m2 : float
        The binding limit as radiant exposure over the exposure duration.
    irradiance_w_per_m2 : float
        The same limit as the mean irradiance over the duration.
    hazard : str
        ``"thermal"`` or ``"photochemical"``, whichever is lower.
    thermal_j_per_m2, photochemical_j_per_m2 : float
        Both limits; the photochemical one (``None`` where it does not apply)
        is expressed for the whole source: for alpha > gamma_ph it is the
        gamma_ph limit times ``(alpha / gamma_ph)**2`` (a uniform source counts
        only with the part inside gamma_ph).
    c_a, c_b, c_c, c_e, alpha_max_mrad, t2_s, gamma_ph_mrad : float
        The factors used (``c_b`` and ``gamma_ph_mrad`` are ``None`` where the
        photochemical limit does not apply).
    regime : str
        Which row of the table the thermal limit comes from.
    edition : str
        :data:`EDITION`.
    """

    wavelength_nm: float
    duration_s: float
    alpha_mrad: float
    radiant_exposure_j_per_m2: float
    irradiance_w_per_m2: float
    hazard: str
    thermal_j_per_m2: float
    photochemical_j_per_m2: float | None
    c_a: float
    c_b: float | None
    c_c: float
    c_e: float
    alpha_max_mrad: float
    t2_s: float
    gamma_ph_mrad: float | None
    regime: str
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    def retinal_energy_mj(self, eye: EyeModel = HUMAN_EYE) -> float:
        """Energy reaching the retina at the limit, ``tau * H * A_7mm`` in mJ."""
        eye = _check_eye(eye)
        return eye.transmission * self.radiant_exposure_j_per_m2 * LIMITING_APERTURE_AREA_M2 * 1e3

    def retinal_power_mw(self, eye: EyeModel = HUMAN_EYE) -> float:
        """Mean power reaching the retina at the limit, ``tau * E * A_7mm`` in mW."""
        eye = _check_eye(eye)
        return eye.transmission * self.irradiance_w_per_m2 * LIMITING_APERTURE_AREA_M2 * 1e3

    def retinal_irradiance_mw_per_mm2(self, eye: EyeModel = HUMAN_EYE) -> float:
        """Mean retinal irradiance of a uniform source image at the limit, mW/mm^2.

        The image diameter is ``max(alpha, alpha_min) * f_eye``.

        References
        ----------
        .. [1] ICNIRP (2013); the cornea-to-retina conversion d = alpha f_eye, E_r = tau P / (pi d^2
           / 4) (REFERENCES.md).
        """
        return retinal_irradiance_mw_per_mm2(self.irradiance_w_per_m2, self.alpha_mrad, eye)

    def summary(self, eye: EyeModel = HUMAN_EYE) -> str:
        lines = [
            f"MPE at the cornea, {self.wavelength_nm:g} nm, {self.duration_s:.4g} s, "
            f"alpha = {self.alpha_mrad:g} mrad ({self.edition})",
            f"  {self.radiant_exposure_j_per_m2:.4g} J/m^2 = {self.irradiance_w_per_m2:.4g} W/m^2 "
            f"mean, {self.hazard} limit binds; thermal row: {self.regime}",
            f"  C_A = {self.c_a:.4g}, C_C = {self.c_c:.4g}, C_E = {self.c_e:.4g}, "
            f"alpha_max = {self.alpha_max_mrad:.4g} mrad, T2 = {self.t2_s:.4g} s"
            + (
                f", C_B = {self.c_b:.4g}, gamma_ph = {self.gamma_ph_mrad:.4g} mrad"
                if self.c_b is not None
                else ""
            ),
            f"  on the retina through {eye.describe()}: "
            f"{self.retinal_irradiance_mw_per_mm2(eye):.4g} mW/mm^2 over a "
            f"{retinal_image_diameter_um(self.alpha_mrad, eye):.4g} um disc",
            CAUTIONS,
        ]
        return "\n".join(lines)


def corneal_mpe(wavelength_nm: float, duration_s: float, alpha_mrad: float) -> CornealMPE:
    """Maximum permissible exposure at the cornea for the retinal hazard region.

    Parameters
    ----------
    wavelength_nm : float
        400-1400 nm.
    duration_s : float
        Exposure duration, 1e-13 to 3e4 s.
    alpha_mrad : float
        Angular subtense of the source (>= 0; below 1.5 mrad it counts as
        1.5 mrad).

    Returns
    -------
    CornealMPE
        Radiant exposure (J/m^2) and mean irradiance (W/m^2) averaged over the
        7 mm limiting aperture, the binding hazard and the factors used.

    Notes
    -----
    Retinal thermal limits for every duration (see ``_thermal_h`` for the
    table), and for 400-600 nm and t > 10 s the photochemical limits
    (100 C_B J/m^2 up to 100 s, 1 C_B W/m^2 beyond, over gamma_ph). The lower
    one binds. The photochemical limit starts at 10 s, so for large sources
    the MPE steps down there; this follows the table as remembered.

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A, Tables
    A.1 and A.2 (values from memory). AS/NZS 2211.1:2004 sample calculation:
    488 nm, 0.25 s, small source gives 1.8 (0.25)**0.75 mJ/cm^2.
    """
    lam = _wavelength(wavelength_nm)
    t = _duration(duration_s)
    a = _alpha(alpha_mrad)
    h_th = float(_thermal_h(lam, t, a))
    h_ph = None
    cb = None
    gamma = None
    if _photochemical_applies(lam, t):
        cb = _c_b_raw(lam)
        gamma = _gamma_ph(t)
        h_ph = float(_photochemical_h(lam, t)) * max(1.0, (a / gamma) ** 2)
    hazard = "photochemical" if (h_ph is not None and h_ph < h_th) else "thermal"
    h = h_th if hazard == "thermal" else float(h_ph)
    return CornealMPE(
        wavelength_nm=lam,
        duration_s=t,
        alpha_mrad=a,
        radiant_exposure_j_per_m2=h,
        irradiance_w_per_m2=h / t,
        hazard=hazard,
        thermal_j_per_m2=h_th,
        photochemical_j_per_m2=h_ph,
        c_a=_c_a_raw(lam),
        c_b=cb,
        c_c=_c_c_raw(lam),
        c_e=float(_c_e_v(a, _alpha_max_v(t))),
        alpha_max_mrad=float(_alpha_max_v(t)),
        t2_s=_t2(a),
        gamma_ph_mrad=gamma,
        regime=_regime(lam, t, a),
    )


# --------------------------------------------------------------------------
# Cornea -> retina
# --------------------------------------------------------------------------


def retinal_image_diameter_um(alpha_mrad: float, eye: EyeModel = HUMAN_EYE) -> float:
    """Retinal image diameter ``d = max(alpha, alpha_min) * f_eye`` in micrometres.

    References
    ----------
    IEC 60825-1:2014, Annex A (alpha_min = 1.5 mrad); 1 mrad x 1 mm = 1 um.
    """
    a = _alpha(alpha_mrad)
    return max(a, ALPHA_MIN_MRAD) * _check_eye(eye).focal_length_mm


def power_into_eye_mw(corneal_irradiance_w_per_m2: float) -> float:
    """Power through the 7 mm limiting aperture, ``P = E * A_7mm``, in mW.

    References
    ----------
    .. [1] ICNIRP, *Health Phys.* 105, 271 (2013): limits averaged over the 7 mm aperture.
    """
    e = v.number("corneal_irradiance_w_per_m2", corneal_irradiance_w_per_m2, lo=0.0)
    return e * LIMITING_APERTURE_AREA_M2 * 1e3


def retinal_irradiance_mw_per_mm2(
    corneal_irradiance_w_per_m2: float, alpha_mrad: float, eye: EyeModel = HUMAN_EYE
) -> float:
    """Retinal irradiance ``tau * P / (pi d^2 / 4)`` of a uniform image of angle alpha, mW/mm^2.

    Parameters
    ----------
    corneal_irradiance_w_per_m2 : float
        Irradiance at the cornea, averaged over the 7 mm aperture.
    alpha_mrad : float
        Angular subtense (below alpha_min the image is taken as alpha_min).
    eye : EyeModel
        Focal length and transmission.

    References
    ----------
    .. [1] ICNIRP (2013); the cornea-to-retina conversion d = alpha f_eye, E_r = tau P / (pi d^2 /
       4) (REFERENCES.md).
    """
    eye = _check_eye(eye)
    p_mw = power_into_eye_mw(corneal_irradiance_w_per_m2) * eye.transmission
    d_mm = retinal_image_diameter_um(alpha_mrad, eye) * 1e-3
    return p_mw / (math.pi * d_mm * d_mm / 4.0)


def retinal_power_limit_mw(
    wavelength_nm: float, duration_s: float, alpha_mrad: float, eye: EyeModel = HUMAN_EYE
) -> float:
    """The MPE as the mean power reaching the retina, ``tau * E_MPE * A_7mm`` in mW.

    References
    ----------
    .. [1] ICNIRP (2013); IEC 60825-1:2014, Annex A.
    """
    return corneal_mpe(wavelength_nm, duration_s, alpha_mrad).retinal_power_mw(eye)


def _retinal_energy_factor_mj(eye: EyeModel) -> float:
    """mJ of retinal energy per J/m^2 of corneal radiant exposure."""
    return eye.transmission * LIMITING_APERTURE_AREA_M2 * 1e3


# --------------------------------------------------------------------------
# Pulses and timelines
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class Pulse:
    """One light pulse of a frame.

    Parameters
    ----------
    start_ms : float
        Start time from the beginning of the sequence, ms, >= 0.
    duration_ms : float
        Pulse width, ms, > 0.
    scale : float
        Multiplies the frame's irradiance (1 = the power the map was computed
        at), >= 0.
    """

    start_ms: float
    duration_ms: float
    scale: float = 1.0

    def __post_init__(self) -> None:
        object.__setattr__(self, "start_ms", v.number("start_ms", self.start_ms, lo=0.0))
        object.__setattr__(
            self, "duration_ms", v.number("duration_ms", self.duration_ms, lo=0.0, lo_open=True)
        )
        object.__setattr__(self, "scale", v.number("scale", self.scale, lo=0.0))

    @property
    def end_ms(self) -> float:
        return self.start_ms + self.duration_ms


def _as_pulses(pulses: Any, field: str = "pulses") -> tuple[Pulse, ...]:
    if isinstance(pulses, Pulse):
        pulses = [pulses]
    try:
        items = list(pulses)
    except TypeError:
        raise ConfigError(field, pulses, "a list of Pulse(start_ms, duration_ms, scale)") from None
    out = []
    for k, p in enumerate(items):
        if isinstance(p, Pulse):
            out.append(p)
            continue
        try:
            parts = tuple(p)
        except TypeError:
            raise ConfigError(
                f"{field}[{k}]", p, "a Pulse or (start_ms, duration_ms[, scale])"
            ) from None
        if len(parts) not in (2, 3):
            raise ConfigError(f"{field}[{k}]", p, "a Pulse or (start_ms, duration_ms[, scale])")
        names = ("start_ms", "duration_ms", "scale")
        try:
            out.append(Pulse(*parts))
        except ConfigError as exc:
            if exc.field in names:
                raise ConfigError(f"{field}[{k}].{exc.field}", exc.value, exc.allowed) from None
            raise
    return tuple(out)


def periodic_pulses(
    pulse_ms: float,
    *,
    period_ms: float | None = None,
    frequency_hz: float | None = None,
    count: int | None = None,
    duration_ms: float | None = None,
    start_ms: float = 0.0,
    scale: float = 1.0,
) -> list[Pulse]:
    """A regular train of pulses.

    Parameters
    ----------
    pulse_ms : float
        Pulse width, ms; at most the period.
    period_ms, frequency_hz : float
        Give one of them.
    count, duration_ms : int or float
        Give one: the number of pulses, or the train length (every pulse that
        ends within ``duration_ms`` of the first start is kept).
    start_ms : float
        Start of the first pulse.
    scale : float
        Scale of every pulse.

    Returns
    -------
    list of Pulse

    References
    ----------
    .. [1] ICNIRP (2013): repeated-pulse rules are applied to the actual pulse timeline.
    """
    w = v.number("pulse_ms", pulse_ms, lo=0.0, lo_open=True)
    if (period_ms is None) == (frequency_hz is None):
        raise ConfigError("period_ms", period_ms, "exactly one of period_ms and frequency_hz")
    if period_ms is not None:
        period = v.number("period_ms", period_ms, lo=0.0, lo_open=True)
    else:
        period = 1000.0 / v.number("frequency_hz", frequency_hz, lo=0.0, lo_open=True)
    if w > period * (1 + 1e-12):
        raise ConfigError(
            "pulse_ms",
            pulse_ms,
            f"<= the period ({period:g} ms)",
            "a pulse cannot be longer than its period",
        )
    if (count is None) == (duration_ms is None):
        raise ConfigError("count", count, "exactly one of count and duration_ms")
    if count is not None:
        n = v.integer("count", count, lo=1)
    else:
        total = v.number("duration_ms", duration_ms, lo=w)
        n = int(math.floor((total - w) / period + 1e-9)) + 1
    t0 = v.number("start_ms", start_ms, lo=0.0)
    s = v.number("scale", scale, lo=0.0)
    return [Pulse(t0 + k * period, w, s) for k in range(n)]


@dataclass(frozen=True)
class RuleResult:
    """The worst ratio of exposure to limit found for one rule.

    Attributes
    ----------
    rule : str
        One of :data:`RULES`.
    ratio : float
        Exposure divided by the limit (> 1 is above the limit).
    hazard : str
        ``"thermal"`` or ``"photochemical"`` (``"none"`` if nothing was lit).
    alpha_mrad : float
        Acceptance angle at which it was found.
    exposure_mj, limit_mj : float
        Retinal energy within the acceptance disc and the limit it is compared
        with (``limit_mj`` includes C_P for rule 3).
    window_start_ms, window_duration_ms : float
        The pulse, group of pulses or window concerned.
    n_pulses : int
        Pulses in that window (rule 2) or N used for C_P (rule 3).
    c_p : float
        C_P (rule 3; 1 otherwise).
    x_um, y_um : float or None
        Retinal location (sequence assessments only).
    """

    rule: str
    ratio: float
    hazard: str
    alpha_mrad: float
    exposure_mj: float
    limit_mj: float
    window_start_ms: float
    window_duration_ms: float
    n_pulses: int = 1
    c_p: float = 1.0
    x_um: float | None = None
    y_um: float | None = None
    bounded: bool = False
    edition: str = EDITION

    @property
    def label(self) -> str:
        return _RULE_LABELS.get(self.rule, self.rule)

    def summary(self) -> str:
        """The figure with the edition and :data:`CAUTIONS`, for standalone output."""
        return f"{self.describe()} [{self.edition}]\n{CAUTIONS}"

    def describe(self) -> str:
        """One line, without the caution (a part of a summary)."""
        text = (
            f"{self.label}: {self.ratio:.3g} of the limit ({self.hazard}, alpha = "
            f"{self.alpha_mrad:.3g} mrad, {self.window_duration_ms:.4g} ms from "
            f"{self.window_start_ms:.4g} ms"
        )
        if self.rule == "average_power":
            text += f", {self.n_pulses} pulse{'s' if self.n_pulses != 1 else ''}"
        if self.rule == "repeated_pulse":
            text += f", N = {self.n_pulses}, C_P = {self.c_p:.3g}"
        if self.x_um is not None:
            text += f", at x = {self.x_um:.1f} um, y = {self.y_um:.1f} um"
        if self.bounded:
            text += ", upper bound"
        return text + ")"


def _empty_rule(rule: str, alpha: float) -> RuleResult:
    return RuleResult(rule, 0.0, "none", alpha, 0.0, math.inf, 0.0, 0.0, 0, 1.0)


def _group_pulses(
    s: np.ndarray, d: np.ndarray, q: np.ndarray, t_i: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Group sorted pulses: those within T_i of a group's start, or touching it, count as one.

    Returns group start, end, energy, the duration to evaluate the limit at
    (at least T_i for a group formed by the T_i rule) and pulse count.
    """
    e = s + d
    n = len(s)
    gs, ge, gq, gd, gn = [], [], [], [], []
    k = 0
    while k < n:
        start, end, energy, count, by_ti = s[k], e[k], q[k], 1, False
        k += 1
        while k < n and (s[k] < start + t_i or s[k] <= end + _TIME_TOL_S):
            if s[k] > end + _TIME_TOL_S:
                by_ti = True
            end = max(end, e[k])
            energy += q[k]
            count += 1
            k += 1
        dur = d[k - 1] if count == 1 else end - start
        if by_ti:
            dur = max(dur, t_i)
        gs.append(start)
        ge.append(end)
        gq.append(energy)
        gd.append(dur)
        gn.append(count)
    return (np.asarray(gs), np.asarray(ge), np.asarray(gq), np.asarray(gd), np.asarray(gn))


def _window_offsets(n: int) -> np.ndarray:
    k = int(math.ceil(math.log(max(n, 2) / _WINDOW_EXACT_SPAN) / math.log(_WINDOW_STEP))) + 1
    geo = np.round(_WINDOW_EXACT_SPAN * _WINDOW_STEP ** np.arange(k + 1)).astype(np.int64)
    off = np.concatenate([np.arange(_WINDOW_EXACT_SPAN), geo, [n - 1]])
    return np.unique(off[off <= n - 1])


def _worst_window(
    s: np.ndarray,
    e: np.ndarray,
    q: np.ndarray,
    dmin: np.ndarray,
    limit_mj: Callable[[np.ndarray], np.ndarray],
) -> tuple[float, int, int, bool]:
    """Worst energy/limit over windows [start_i, end_j] of sorted pulses (rule 2).

    Every window from a pulse start to a later pulse end is evaluated for up
    to ``_EXACT_WINDOW_MAX`` pulses; longer trains take every window up to
    ``_WINDOW_EXACT_SPAN`` pulses long and a geometric set of longer ones,
    and bound each skipped window from above by (energy up to the next
    evaluated end) / (limit at the previous evaluated end), so that the
    result can only err high. Cumulative sums give each window's energy.
    """
    n = len(s)
    csum = np.concatenate(([0.0], np.cumsum(q)))
    emax = np.maximum.accumulate(e)
    offsets = np.arange(n) if n <= _EXACT_WINDOW_MAX else _window_offsets(n)
    sampled = n > _EXACT_WINDOW_MAX
    best, bi, bj, bounded = -1.0, 0, 0, False
    rows = max(1, 2_000_000 // max(1, len(offsets)))
    for i0 in range(0, n, rows):
        i = np.arange(i0, min(n, i0 + rows))[:, None]
        j = i + offsets[None, :]
        valid = j < n
        jc = np.minimum(j, n - 1)
        energy = csum[jc + 1] - csum[i]
        dur = np.maximum(emax[jc] - s[i], dmin[i])
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.where(valid, energy / limit_mj(dur), 0.0)
        r = np.nan_to_num(r, nan=0.0, posinf=np.inf)
        if sampled:
            # the window to the last pulse, exactly
            last_e = csum[n] - csum[i[:, 0]]
            last_d = np.maximum(emax[n - 1] - s[i[:, 0]], dmin[i[:, 0]])
            with np.errstate(divide="ignore", invalid="ignore"):
                r_last = np.nan_to_num(last_e / limit_mj(last_d), nan=0.0)
            # upper bounds for the skipped windows between evaluated ends
            lo = i + offsets[None, :-1] + 1
            hi = np.minimum(i + offsets[None, 1:] - 1, n - 1)
            gap = (lo <= hi) & (lo <= n - 1)
            loc = np.minimum(lo, n - 1)
            hic = np.maximum(np.minimum(hi, n - 1), 0)
            b_e = csum[hic + 1] - csum[i]
            b_d = np.maximum(emax[loc] - s[i], dmin[i])
            with np.errstate(divide="ignore", invalid="ignore"):
                b = np.where(gap, np.nan_to_num(b_e / limit_mj(b_d), nan=0.0), 0.0)
        flat = int(np.argmax(r))
        val = float(r.flat[flat])
        if val > best:
            best = val
            bi = i0 + flat // r.shape[1]
            bj = min(bi + int(offsets[flat % r.shape[1]]), n - 1)
            bounded = False
        if sampled:
            k = int(np.argmax(r_last))
            if float(r_last[k]) > best:
                best, bi, bj, bounded = float(r_last[k]), i0 + k, n - 1, False
            if b.size:
                flat = int(np.argmax(b))
                val = float(b.flat[flat])
                if val > best:
                    row = flat // b.shape[1]
                    best = val
                    bi = i0 + row
                    bj = int(hic[row, flat % b.shape[1]])
                    bounded = True
    return max(best, 0.0), bi, bj, bounded


def _max_count_in(s: np.ndarray, span: float) -> int:
    """Largest number of pulses that start within any interval of length ``span``."""
    if len(s) == 0:
        return 0
    counts = np.searchsorted(s, s + span, side="left") - np.arange(len(s))
    return int(counts.max())


def _timeline_rules(
    starts_s: np.ndarray,
    durs_s: np.ndarray,
    powers_mw: np.ndarray,
    lam: float,
    alpha: float,
    eye: EyeModel,
    hazard: str,
) -> dict[str, RuleResult]:
    """Rules 1-3 for one location and one acceptance angle (powers within that disc)."""
    out = {r: _empty_rule(r, alpha) for r in RULES}
    keep = powers_mw > 0
    if not np.any(keep):
        return out
    order = np.argsort(starts_s[keep], kind="stable")
    s = starts_s[keep][order]
    d = durs_s[keep][order]
    p = powers_mw[keep][order]
    q = p * d  # mJ
    t_i = _T_NS_END_S[lam >= 1050.0]
    factor = _retinal_energy_factor_mj(eye)
    if hazard == "thermal":

        def limit(t: np.ndarray) -> np.ndarray:
            return factor * _thermal_h(lam, t, alpha)

    else:

        def limit(t: np.ndarray) -> np.ndarray:
            return factor * _photochemical_h(lam, t)

    # Rule 2: every group of pulses; grouping within T_i changes no energy.
    gs, ge, gq, gd, gn = _group_pulses(s, d, q, t_i)
    ratio, i, j, bounded = _worst_window(gs, ge, gq, gd, limit)
    if ratio > 0:
        dur = max(float(np.max(ge[i : j + 1]) - gs[i]), float(gd[i]))
        energy = float(gq[i : j + 1].sum())
        out["average_power"] = RuleResult(
            "average_power",
            ratio,
            hazard,
            alpha,
            energy,
            float(limit(np.asarray(dur))),
            float(gs[i] * 1e3),
            dur * 1e3,
            int(gn[i : j + 1].sum()),
            1.0,
            bounded=bounded,
        )
    # Rules 1 and 3 on the pulses that count at this location.
    counted = p >= _COUNT_THRESHOLD * p.max()
    cs, _ce, cq, cd, _cn = _group_pulses(s[counted], d[counted], q[counted], t_i)
    lim1 = limit(cd)
    with np.errstate(divide="ignore", invalid="ignore"):
        r1 = np.nan_to_num(cq / lim1, nan=0.0)
    k = int(np.argmax(r1))
    if r1[k] > 0:
        out["single_pulse"] = RuleResult(
            "single_pulse",
            float(r1[k]),
            hazard,
            alpha,
            float(cq[k]),
            float(lim1[k]),
            float(cs[k] * 1e3),
            float(cd[k] * 1e3),
            1,
            1.0,
        )
    if hazard == "thermal":
        n_cp = max(1, _max_count_in(cs, _t2(alpha)))
        cp = _c_p_v(np.full(len(cd), float(n_cp)), alpha, cd)
        r3 = r1 / cp
        k = int(np.argmax(r3))
        if r3[k] > 0:
            out["repeated_pulse"] = RuleResult(
                "repeated_pulse",
                float(r3[k]),
                hazard,
                alpha,
                float(cq[k]),
                float(lim1[k] * cp[k]),
                float(cs[k] * 1e3),
                float(cd[k] * 1e3),
                n_cp,
                float(cp[k]),
            )
    return out


def _merge_rules(a: dict[str, RuleResult], b: dict[str, RuleResult]) -> dict[str, RuleResult]:
    return {r: (b[r] if b[r].ratio > a[r].ratio else a[r]) for r in RULES}


def _binding(rules: dict[str, RuleResult]) -> RuleResult:
    best = rules[RULES[0]]
    for r in RULES[1:]:
        if rules[r].ratio > best.ratio * (1 + 1e-9):
            best = rules[r]
    return best


def _timeline_arrays(pulses: Sequence[Pulse], field: str) -> tuple[np.ndarray, np.ndarray]:
    starts = np.array([p.start_ms for p in pulses], dtype=np.float64) * 1e-3
    durs = np.array([p.duration_ms for p in pulses], dtype=np.float64) * 1e-3
    if len(pulses):
        span = float(np.max(starts + durs) - np.min(starts))
        if span > DURATION_MAX_S:
            raise ConfigError(
                field,
                f"{span:g} s",
                f"a timeline of at most {DURATION_MAX_S:g} s",
                "the tables end at 3e4 s",
            )
    return starts, durs


def _verdict(ratio: float) -> str:
    return "above" if ratio > 1.0 else "within"


def _margin(ratio: float) -> float:
    return math.inf if ratio <= 0 else 1.0 / ratio


@dataclass(frozen=True)
class TrainAssessment:
    """The three rules applied to a pulse train at one location and one acceptance angle.

    Attributes
    ----------
    rules : dict of str to RuleResult
        Keyed by :data:`RULES`.
    worst : RuleResult
        The binding rule.
    worst_ratio, margin : float
        Worst exposure/limit ratio and its inverse.
    binding_rule : str
        One of :data:`RULES`.
    verdict : str
        ``"within"`` or ``"above"`` the limit.
    """

    wavelength_nm: float
    alpha_mrad: float
    peak_retinal_power_mw: float
    n_pulses: int
    duration_s: float
    rules: dict[str, RuleResult]
    worst: RuleResult
    worst_ratio: float
    margin: float
    binding_rule: str
    verdict: str
    basis: str
    notes: tuple[str, ...]
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    def ratio(self, rule: str) -> float:
        return self.rules[rule].ratio

    def summary(self) -> str:
        lines = [
            f"Pulse train at {self.wavelength_nm:g} nm, alpha = {self.alpha_mrad:g} mrad, "
            f"{self.n_pulses} pulses over {self.duration_s:.4g} s, peak retinal power "
            f"{self.peak_retinal_power_mw:.4g} mW ({self.edition})",
        ]
        lines += ["  " + self.rules[r].describe() for r in RULES]
        lines.append(
            f"  worst: {self.worst_ratio:.3g} of the limit ({_RULE_LABELS[self.binding_rule]}), "
            f"margin {self.margin:.3g}x, {self.verdict} the limit"
        )
        lines.append("  Basis: " + self.basis)
        lines.append(CAUTIONS)
        return "\n".join(lines)


def evaluate_train(
    pulses: Iterable[Pulse],
    wavelength_nm: float,
    alpha_mrad: float,
    peak_retinal_power_mw: float,
    *,
    photochemical_power_mw: float | None = None,
    eye: EyeModel = HUMAN_EYE,
    subject: str | None = None,
) -> TrainAssessment:
    """Rules 1-3 for a timeline of pulses at one retinal location.

    Parameters
    ----------
    pulses : iterable of Pulse
        The timeline (any widths, rates and pauses; ``scale`` multiplies the
        peak power).
    wavelength_nm : float
        400-1400 nm.
    alpha_mrad : float
        Acceptance angle; the power is the power within a retinal disc of
        diameter ``alpha * f_eye`` (at least alpha_min).
    peak_retinal_power_mw : float
        Retinal power within that disc during a pulse of scale 1, mW, > 0.
    photochemical_power_mw : float, optional
        For 400-600 nm and windows longer than 10 s: the power within the
        gamma_ph disc (:func:`photochemical_gamma_mrad` of the train length).
        By default the same power is used, which is right when the whole source
        lies inside both discs (a small spot).
    eye : EyeModel
        Reference eye for the cornea-to-retina conversion.
    subject : str, optional
        The eye the stimulus is for (``"rat"``), named in the basis text.

    Returns
    -------
    TrainAssessment

    Notes
    -----
    Rule 1: each pulse (pulses within T_i of a group's first pulse, or
    touching it, count as one) against the single-pulse limit. Rule 2: the
    energy of every group of pulses from a pulse start to a later pulse end
    against the limit for that duration; the whole train is one of them. Rule
    3 (thermal): each pulse against the single-pulse limit times
    C_P = N**-0.25 with the alpha-dependent floors, where N is the largest
    number of pulses that start within any interval of length T2 (from
    memory).

    References
    ----------
    ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A, repeated
    exposure (values from memory).
    """
    lam = _wavelength(wavelength_nm)
    a = _alpha(alpha_mrad)
    power = v.number("peak_retinal_power_mw", peak_retinal_power_mw, lo=0.0, lo_open=True)
    eye = _check_eye(eye)
    items = _as_pulses(pulses)
    if not items:
        raise ConfigError("pulses", [], "at least one pulse")
    starts, durs = _timeline_arrays(items, "pulses")
    scales = np.array([p.scale for p in items], dtype=np.float64)
    total = float(np.max(starts + durs) - np.min(starts))
    rules = _timeline_rules(starts, durs, power * scales, lam, a, eye, "thermal")
    notes = [
        "Rule 2 windows run from each pulse start to each later pulse end "
        f"(every window up to {_EXACT_WINDOW_MAX} pulses; longer trains bounded from above).",
        f"Rule 3 counts N within T2 = {_t2(a):.3g} s (from memory); pulses within T_i = "
        f"{_T_NS_END_S[lam >= 1050.0] * 1e6:g} us count as one.",
    ]
    if _photochemical_applies(lam, total):
        pp = (
            power
            if photochemical_power_mw is None
            else v.number("photochemical_power_mw", photochemical_power_mw, lo=0.0)
        )
        photo = _timeline_rules(starts, durs, pp * scales, lam, a, eye, "photochemical")
        rules = _merge_rules(rules, photo)
        notes.append(
            f"Photochemical limits evaluated for windows over 10 s with gamma_ph = "
            f"{_gamma_ph(total):.3g} mrad"
            + (" (same power as the thermal disc)." if photochemical_power_mw is None else ".")
        )
    worst = _binding(rules)
    return TrainAssessment(
        wavelength_nm=lam,
        alpha_mrad=a,
        peak_retinal_power_mw=power,
        n_pulses=len(items),
        duration_s=total,
        rules=rules,
        worst=worst,
        worst_ratio=worst.ratio,
        margin=_margin(worst.ratio),
        binding_rule=worst.rule,
        verdict=_verdict(worst.ratio),
        basis=_basis_text(eye, subject),
        notes=tuple(notes),
    )


# --------------------------------------------------------------------------
# Disc integration on a retinal map
# --------------------------------------------------------------------------


def _point_area_mm2(diameter_um: float) -> float:
    """Area of a disc of ``diameter_um``, mm^2."""
    return math.pi * (diameter_um * 1e-3) ** 2 / 4.0


class _DiscIntegrator:
    """Disc power maps on one grid, zero-padded for the largest disc.

    The padded FFT shape is fixed by the largest diameter, so one spectrum of a
    map (:meth:`spectrum`) serves every diameter. The spectra of the disc
    kernels are cached per diameter until :meth:`forget`.
    """

    def __init__(self, grid: RetinalGrid, max_diameter_um: float):
        self.grid = grid
        self.shape = self._padded_shape(max_diameter_um)
        self._kernels: dict[float, tuple[np.ndarray, tuple[int, int]]] = {}

    def _kernel_half(self, diameter_um: float) -> tuple[int, int]:
        g = self.grid
        return kernel_half(diameter_um, g.pitch_x_um, g.pitch_y_um, g.rows, g.cols)

    def _padded_shape(self, diameter_um: float) -> tuple[int, int]:
        hy, hx = self._kernel_half(diameter_um)
        rows, cols = self.grid.shape
        return (
            sfft.next_fast_len(rows + 2 * hy, real=True),
            sfft.next_fast_len(cols + 2 * hx, real=True),
        )

    def is_point(self, diameter_um: float) -> bool:
        """A disc that fits in one sample is integrated as a point (no FFT)."""
        return diameter_um <= min(self.grid.pitch_x_um, self.grid.pitch_y_um)

    @property
    def spectrum_nbytes(self) -> int:
        """Bytes of one spectrum (complex64, real-input half plane)."""
        return self.shape[0] * (self.shape[1] // 2 + 1) * 8

    def spectrum(self, irradiance: np.ndarray) -> np.ndarray:
        """Spectrum of a map on the padded shape, for :meth:`power_map_mw`."""
        return sfft.rfft2(irradiance, s=self.shape, workers=-1)

    def forget(self) -> None:
        """Drop the cached kernel spectra."""
        self._kernels.clear()

    def _kernel_spectrum(self, diameter_um: float) -> tuple[np.ndarray, tuple[int, int]]:
        hit = self._kernels.get(diameter_um)
        if hit is None:
            g = self.grid
            hy, hx = self._kernel_half(diameter_um)
            kernel = _disc_kernel(diameter_um, g.pitch_x_um, g.pitch_y_um, hy, hx)
            hit = (sfft.rfft2(kernel, s=self.shape, workers=-1), kernel.shape)
            self._kernels[diameter_um] = hit
        return hit

    def power_map_mw(
        self,
        irradiance: np.ndarray | None,
        diameter_um: float,
        spectrum: np.ndarray | None = None,
    ) -> np.ndarray:
        """Disc power map (float32 on the grid) of a map, given as ``irradiance``
        or by its :meth:`spectrum` (which saves the FFT; a disc that is a point
        needs the map itself)."""
        g = self.grid
        if self.is_point(diameter_um):
            # A disc that fits in one sample is a point: the sample's irradiance times its area.
            assert irradiance is not None
            return irradiance * np.float32(_point_area_mm2(diameter_um))
        need = self._padded_shape(diameter_um)
        if need[0] > self.shape[0] or need[1] > self.shape[1]:
            self.shape = need
            self._kernels.clear()
        if spectrum is None or spectrum.shape != (self.shape[0], self.shape[1] // 2 + 1):
            assert irradiance is not None
            spectrum = self.spectrum(irradiance)
        kspec, (kh, kw) = self._kernel_spectrum(diameter_um)
        full = sfft.irfft2(spectrum * kspec, s=self.shape, workers=-1)
        out = np.array(full[kh // 2 : kh // 2 + g.rows, kw // 2 : kw // 2 + g.cols])
        del full
        # Float32 FFT round-off: values below 1e-6 of the largest are set to zero, so
        # that a frame lit elsewhere adds no spurious pulses at a location.
        out[out < 1e-6 * float(out.max())] = 0.0
        return out.astype(np.float32, copy=False)


def _check_grid(grid: Any) -> RetinalGrid:
    if not isinstance(grid, RetinalGrid):
        raise ConfigError("grid", grid, "a RetinalGrid")
    return grid


def _check_map(value: Any, grid: RetinalGrid, field: str) -> np.ndarray:
    return v.finite_array(field, value, shape=grid.shape, lo=0.0, dtype=np.float32)


def disc_power_map(irradiance_mw_per_mm2: Any, grid: RetinalGrid, diameter_um: float) -> np.ndarray:
    """Power within a disc centred on each sample, mW (float32).

    Parameters
    ----------
    irradiance_mw_per_mm2 : array_like
        Retinal irradiance on ``grid``, >= 0.
    grid : RetinalGrid
        Sampling of the map.
    diameter_um : float
        Disc diameter on the retina (``alpha * f_eye``).

    Notes
    -----
    FFT convolution (``scipy.fft``, all cores) with an area-weighted disc:
    each kernel sample holds the area of its cell inside the circle, so a disc
    of any size is integrated without aliasing. A disc that fits inside one
    sample is a point: the power is the sample's irradiance times the disc
    area (the irradiance is taken as uniform within a sample). Light outside
    the grid is taken as zero.

    References
    ----------
    .. [1] ICNIRP (2013); IEC 60825-1:2014, Annex A (varying acceptance angle for extended sources).
    """
    grid = _check_grid(grid)
    irr = _check_map(irradiance_mw_per_mm2, grid, "irradiance_mw_per_mm2")
    d = v.number("diameter_um", diameter_um, lo=0.0, lo_open=True)
    return _DiscIntegrator(grid, d).power_map_mw(np.ascontiguousarray(irr), d)


def max_disc_power(
    irradiance_mw_per_mm2: Any,
    grid: RetinalGrid,
    alpha_mrad: float,
    eye: EyeModel = HUMAN_EYE,
) -> tuple[float, float, float]:
    """Largest power within a disc of angular diameter alpha anywhere on the map.

    Returns
    -------
    power_mw, x_um, y_um : float
        The power and the retinal position of the disc centre.

    References
    ----------
    .. [1] ICNIRP (2013); IEC 60825-1:2014, Annex A (varying acceptance angle).
    """
    d = retinal_image_diameter_um(alpha_mrad, eye)
    pm = disc_power_map(irradiance_mw_per_mm2, grid, d)
    row, col = _peak_location(pm)
    x, y = grid.point_of(row, col)
    return float(pm[row, col]), float(x), float(y)


def default_acceptance_angles_mrad(
    pulse_durations_s: Iterable[float] = (),
    *,
    total_duration_s: float | None = None,
    wavelength_nm: float | None = None,
    n_log: int = 10,
) -> tuple[float, ...]:
    """Acceptance angles for the varying-angle method.

    ``n_log`` log-spaced angles from alpha_min = 1.5 mrad to 100 mrad (both
    ends included), plus 5 mrad (where C_P starts), alpha_max of each pulse
    duration given, alpha_max of the whole exposure and, for 400-600 nm
    exposures over 10 s, gamma_ph of the whole exposure.

    References
    ----------
    .. [1] ICNIRP (2013): alpha_min = 1.5 mrad, alpha_max depends on the duration (from memory).
    """
    n = v.integer("n_log", n_log, lo=2)
    angles = set(np.round(np.geomspace(ALPHA_MIN_MRAD, 100.0, n), 6).tolist())
    angles.add(_CP_NO_REDUCTION_MRAD)
    for t in pulse_durations_s:
        angles.add(round(float(_alpha_max_v(float(t))), 6))
    if total_duration_s is not None:
        angles.add(round(float(_alpha_max_v(total_duration_s)), 6))
        if wavelength_nm is not None and _photochemical_applies(wavelength_nm, total_duration_s):
            angles.add(round(_gamma_ph(total_duration_s), 6))
    return tuple(sorted(a for a in angles if ALPHA_MIN_MRAD <= a <= 110.0))


# --------------------------------------------------------------------------
# Sequence assessment
# --------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Frame:
    """One frame of a sequence: a predicted retina and when it is lit.

    Parameters
    ----------
    irradiance_mw_per_mm2 : ndarray or callable
        Retinal irradiance at the frame's laser power, on the shared grid; or a
        zero-argument callable that returns it (a *lazy* frame: a function that
        reads the map from disk or scales a shared base map). A lazy map is
        obtained only when it is needed and is not kept: it may be called
        several times, and must return the same values each time.
    pulses : sequence of Pulse
        When the frame is shown (times from the start of the sequence).
    label : str
        Name shown in reports.
    key : str, optional
        Frames with the same key show the same map: it is obtained from the
        first frame with that key and treated as one map (the others' maps are
        not read). Without a key, frames whose ``irradiance_mw_per_mm2`` is the
        same array or the same callable, or whose callables return the same
        array object, are treated as one map.

    Notes
    -----
    Use :meth:`load_irradiance_mw_per_mm2` to obtain the array of either kind.
    """

    irradiance_mw_per_mm2: np.ndarray | Callable[[], Any]
    pulses: tuple[Pulse, ...]
    label: str = ""
    key: str | None = None

    @property
    def is_lazy(self) -> bool:
        """True if the map is obtained from a callable."""
        return callable(self.irradiance_mw_per_mm2)

    def load_irradiance_mw_per_mm2(self, grid: RetinalGrid | None = None) -> np.ndarray:
        """The frame's map as a checked float32 array (calls a lazy frame's callable).

        Parameters
        ----------
        grid : RetinalGrid, optional
            If given, the map must have its shape.

        Returns
        -------
        ndarray
            Float32, finite, >= 0. Not cached: a lazy frame's callable is
            called on every use.
        """
        shape = None if grid is None else _check_grid(grid).shape
        return _load_map(self.irradiance_mw_per_mm2, shape, "irradiance_mw_per_mm2")


def _call_map(source: Callable[[], Any], field: str) -> Any:
    try:
        return source()
    except ConfigError:
        raise
    except Exception as exc:
        raise ConfigError(
            field,
            source,
            "an irradiance map (mW/mm^2) or a zero-argument callable returning one",
            f"the callable raised {type(exc).__name__}: {exc}",
        ) from exc


def _load_map(source: Any, shape: tuple[int, int] | None, field: str) -> np.ndarray:
    value = _call_map(source, field) if callable(source) else source
    ndim = 2 if shape is None else None
    return v.finite_array(field, value, shape=shape, ndim=ndim, lo=0.0, dtype=np.float32)


@dataclass(frozen=True)
class ProtocolCap:
    """Caps of the user's own protocol (e.g. an ethics or animal-use protocol).

    Parameters
    ----------
    peak_irradiance_mw_per_mm2 : float, optional
        Largest retinal irradiance of any sample at any time.
    mean_irradiance_mw_per_mm2 : float, optional
        Largest time-average retinal irradiance of any sample, averaged over
        the sequence (first pulse start to last pulse end).
    name, source : str
        Shown beside the figures.

    A protocol cap can only add restrictions: it can make the verdict
    ``"above"``, never relax the standard.
    """

    peak_irradiance_mw_per_mm2: float | None = None
    mean_irradiance_mw_per_mm2: float | None = None
    name: str = "protocol"
    source: str = ""

    def __post_init__(self) -> None:
        if self.peak_irradiance_mw_per_mm2 is None and self.mean_irradiance_mw_per_mm2 is None:
            raise ConfigError(
                "protocol", None, "a peak or a mean irradiance cap (mW/mm^2), or both"
            )
        for name in ("peak_irradiance_mw_per_mm2", "mean_irradiance_mw_per_mm2"):
            val = getattr(self, name)
            if val is not None:
                object.__setattr__(
                    self, name, v.number(f"protocol.{name}", val, lo=0.0, lo_open=True)
                )


@dataclass(frozen=True)
class ProtocolResult:
    """The sequence measured against a :class:`ProtocolCap`."""

    cap: ProtocolCap
    peak_irradiance_mw_per_mm2: float
    mean_irradiance_mw_per_mm2: float
    peak_ratio: float | None
    mean_ratio: float | None
    worst_ratio: float
    verdict: str
    peak_at_um: tuple[float, float]
    mean_at_um: tuple[float, float]
    edition: str = EDITION

    def summary(self) -> str:
        """The figures with :data:`CAUTIONS`, for standalone output."""
        return f"{self.describe()}\n{CAUTIONS}"

    def describe(self) -> str:
        """One line, without the caution (a part of a summary)."""
        parts = [f"protocol cap '{self.cap.name}'"]
        if self.peak_ratio is not None:
            parts.append(
                f"peak {self.peak_irradiance_mw_per_mm2:.4g} mW/mm^2 is {self.peak_ratio:.4g} of "
                f"the cap {self.cap.peak_irradiance_mw_per_mm2:.4g}"
            )
        if self.mean_ratio is not None:
            parts.append(
                f"time average {self.mean_irradiance_mw_per_mm2:.4g} mW/mm^2 is "
                f"{self.mean_ratio:.4g} of the cap {self.cap.mean_irradiance_mw_per_mm2:.4g}"
            )
        parts.append(f"{self.verdict} the cap")
        return "; ".join(parts)


@dataclass(frozen=True)
class AngleResult:
    """Worst figures at one acceptance angle."""

    alpha_mrad: float
    diameter_um: float
    max_disc_power_mw: float
    worst_ratio: float
    rule: str
    hazard: str
    edition: str = EDITION


@dataclass(frozen=True, eq=False)
class ExposureAssessment:
    """A sequence of frames assessed against the retinal limits.

    Attributes
    ----------
    dose_map_mj_per_mm2 : ndarray
        Retinal radiant exposure of each sample over the whole sequence.
    peak_irradiance_map_mw_per_mm2 : ndarray
        Largest irradiance of each sample at any time.
    rules : dict of str to RuleResult
        Worst result of each rule over angles and locations.
    worst : RuleResult
        The binding one, with ``x_um``, ``y_um``, ``alpha_mrad``.
    worst_ratio, margin : float
        Worst exposure/limit ratio of the standard and its inverse.
    verdict_standard : str
        ``"within"`` or ``"above"`` the standard's limit.
    protocol : ProtocolResult or None
        The protocol cap, if one was given, reported beside the standard.
    verdict : str
        Overall: ``"above"`` if the standard or the protocol cap is exceeded.
    angles : tuple of AngleResult
        Worst figures per acceptance angle.
    """

    wavelength_nm: float
    grid: RetinalGrid = field(repr=False)
    n_frames: int
    n_pulses: int
    duration_s: float
    dose_map_mj_per_mm2: np.ndarray = field(repr=False)
    peak_irradiance_map_mw_per_mm2: np.ndarray = field(repr=False)
    rules: dict[str, RuleResult]
    worst: RuleResult
    worst_ratio: float
    margin: float
    binding_rule: str
    verdict_standard: str
    protocol: ProtocolResult | None
    verdict: str
    angles: tuple[AngleResult, ...]
    basis: str
    notes: tuple[str, ...]
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    @property
    def max_dose_mj_per_mm2(self) -> float:
        return float(self.dose_map_mj_per_mm2.max())

    @property
    def peak_irradiance_mw_per_mm2(self) -> float:
        return float(self.peak_irradiance_map_mw_per_mm2.max())

    def ratio(self, rule: str) -> float:
        return self.rules[rule].ratio

    def worst_ratio_per_mw(self, laser_power_mw: float) -> float:
        """Worst ratio per mW of laser power, given the power the maps were computed at."""
        p = v.number("laser_power_mw", laser_power_mw, lo=0.0, lo_open=True)
        return self.worst_ratio / p

    def protocol_ratio_per_mw(self, laser_power_mw: float) -> float | None:
        p = v.number("laser_power_mw", laser_power_mw, lo=0.0, lo_open=True)
        return None if self.protocol is None else self.protocol.worst_ratio / p

    def summary(self) -> str:
        lines = [
            f"Exposure estimate ({self.edition})",
            f"  {self.wavelength_nm:g} nm, {self.n_frames} frame(s), {self.n_pulses} pulse(s) "
            f"over {self.duration_s:.4g} s",
            f"  peak retinal irradiance {self.peak_irradiance_mw_per_mm2:.4g} mW/mm^2, "
            f"largest dose {self.max_dose_mj_per_mm2:.4g} mJ/mm^2",
        ]
        lines += ["  " + self.rules[r].describe() for r in RULES]
        lines.append(
            f"  standard: worst {self.worst_ratio:.3g} of the limit "
            f"({_RULE_LABELS[self.binding_rule]}), margin {self.margin:.3g}x, "
            f"{self.verdict_standard} the limit"
        )
        if self.protocol is not None:
            lines.append("  " + self.protocol.describe())
        lines.append(f"  overall verdict: {self.verdict}")
        lines.append("  Basis: " + self.basis)
        lines += ["  Note: " + n for n in self.notes]
        lines.append(CAUTIONS)
        return "\n".join(lines)

    def as_dict(self) -> dict[str, Any]:
        """Scalars for a manifest or a report (no arrays)."""

        def rule(r: RuleResult) -> dict[str, Any]:
            return {
                "ratio": r.ratio,
                "hazard": r.hazard,
                "alpha_mrad": r.alpha_mrad,
                "x_um": r.x_um,
                "y_um": r.y_um,
                "window_start_ms": r.window_start_ms,
                "window_duration_ms": r.window_duration_ms,
                "n_pulses": r.n_pulses,
                "c_p": r.c_p,
            }

        out: dict[str, Any] = {
            "edition": self.edition,
            "wavelength_nm": self.wavelength_nm,
            "duration_s": self.duration_s,
            "n_frames": self.n_frames,
            "n_pulses": self.n_pulses,
            "worst_ratio": self.worst_ratio,
            "margin": self.margin,
            "binding_rule": self.binding_rule,
            "verdict_standard": self.verdict_standard,
            "verdict": self.verdict,
            "peak_irradiance_mw_per_mm2": self.peak_irradiance_mw_per_mm2,
            "max_dose_mj_per_mm2": self.max_dose_mj_per_mm2,
            "rules": {r: rule(self.rules[r]) for r in RULES},
            "basis": self.basis,
            "notes": list(self.notes),
            "caution": CAUTIONS,
        }
        if self.protocol is not None:
            out["protocol"] = {
                "name": self.protocol.cap.name,
                "peak_ratio": self.protocol.peak_ratio,
                "mean_ratio": self.protocol.mean_ratio,
                "worst_ratio": self.protocol.worst_ratio,
                "verdict": self.protocol.verdict,
            }
        return out


def _as_frames(frames: Any, grid: RetinalGrid) -> list[Frame]:
    """Frames with checked pulses, labels and keys; eager maps are checked, lazy ones not read."""
    try:
        items = list(frames)
    except TypeError:
        raise ConfigError("frames", frames, "a list of Frame(irradiance, pulses)") from None
    if not items:
        raise ConfigError("frames", [], "at least one frame")
    out = []
    for k, f in enumerate(items):
        key = None
        if isinstance(f, Frame):
            irr, pulses, label, key = f.irradiance_mw_per_mm2, f.pulses, f.label, f.key
        else:
            try:
                parts = tuple(f)
            except TypeError:
                raise ConfigError(f"frames[{k}]", f, "a Frame or (irradiance, pulses)") from None
            if len(parts) not in (2, 3):
                raise ConfigError(f"frames[{k}]", f, "a Frame or (irradiance, pulses[, label])")
            irr, pulses = parts[0], parts[1]
            label = parts[2] if len(parts) == 3 else ""
        if key is not None and not isinstance(key, str):
            raise ConfigError(f"frames[{k}].key", key, "a string or None")
        if not callable(irr):
            # Checked now, as before; the checked copy (if any) is not kept.
            _check_map(irr, grid, f"frames[{k}].irradiance_mw_per_mm2")
        out.append(Frame(irr, _as_pulses(pulses, f"frames[{k}].pulses"), str(label), key))
    return out


@dataclass
class _MapGroup:
    """Frames that show one map; the map is read from the first one's source."""

    source: Any
    field: str
    frames: list[int]
    key: str | None = None


def _map_groups(items: Sequence[Frame]) -> list[_MapGroup]:
    """Group frames by map: same key, same array, same callable or same returned array.

    A lazy frame without a key whose callable was not seen before is called once
    here to learn which array it returns; the array is not kept (a weak
    reference recognises it if another frame's callable returns it while it is
    alive elsewhere, e.g. a shared base map).
    """
    groups: list[_MapGroup] = []
    by_key: dict[str, int] = {}
    by_callable: dict[int, int] = {}
    by_object: dict[int, tuple[Any, int]] = {}

    def known(obj: Any) -> int | None:
        hit = by_object.get(id(obj))
        if hit is None:
            return None
        ref, gi = hit
        target = ref() if isinstance(ref, weakref.ref) else ref
        return gi if target is obj else None

    def new_group(k: int, source: Any, key: str | None = None) -> int:
        groups.append(_MapGroup(source, f"frames[{k}].irradiance_mw_per_mm2", [], key))
        return len(groups) - 1

    for k, f in enumerate(items):
        src = f.irradiance_mw_per_mm2
        if f.key is not None:
            gi = by_key.get(f.key)
            if gi is None:
                gi = by_key[f.key] = new_group(k, src, f.key)
        elif not callable(src):
            gi = known(src)
            if gi is None:
                gi = new_group(k, src)
                by_object[id(src)] = (src, gi)  # alive: ``items`` holds it
        else:
            gi = by_callable.get(id(src))  # alive: ``items`` holds it
            if gi is None:
                obj = _call_map(src, f"frames[{k}].irradiance_mw_per_mm2")
                gi = known(obj)
                if gi is None:
                    gi = new_group(k, src)
                    try:
                        by_object[id(obj)] = (weakref.ref(obj), gi)
                    except TypeError:
                        pass  # not weak-referenceable: it cannot be recognised again
                by_callable[id(src)] = gi
                del obj
        groups[gi].frames.append(k)
    return groups


@nb.njit(parallel=True, cache=True, nogil=True)
def _accumulate_map(dose, peak, irr, weight, scale, add_peak, lit):  # pragma: no cover
    """``dose += weight * irr``; ``peak += scale * irr`` or ``peak = max(peak, scale * irr)``;
    ``lit[0]`` set if any sample of ``irr`` is non-zero (float64 accumulators)."""
    rows, cols = irr.shape
    n_light = 0
    for i in nb.prange(rows):
        for j in range(cols):
            x = np.float64(irr[i, j])
            if x != 0.0:
                n_light += 1
            if weight > 0:
                dose[i, j] += x * weight
            if scale > 0:
                p = x * scale
                if add_peak:
                    peak[i, j] += p
                elif p > peak[i, j]:
                    peak[i, j] = p
    lit[0] = n_light > 0


@lru_cache(maxsize=16)
def _disc_sums(diameter_um: float, pitch_x_um: float, pitch_y_um: float, shape) -> DiscSums:
    """One :class:`DiscSums` per disc and grid, shared by the assessments of a session
    (it keeps the kernel spectra of its coarse stage)."""
    return DiscSums(diameter_um, pitch_x_um, pitch_y_um, shape)


@dataclass
class _AngleMaps:
    """What the rules need of one acceptance angle: the largest disc power of any
    frame, the evaluation locations and, per location, the disc power of each map."""

    max_power_mw: float
    locations: list[tuple[int, int]]
    power_at: np.ndarray  # (location, map group), float64


class _MapSweep:
    """The maps of a sequence, visited one at a time, twice.

    Pass 1 (:meth:`first_pass`) reads each map once: it adds it to the dose and
    peak maps and finds, for every acceptance angle, the centre and value of
    its largest disc power. The evaluation locations are then final: those
    maxima, the maximum of each angle's disc-energy map (the disc power of the
    dose map, by linearity) and the samples of largest dose and peak
    irradiance. Pass 2 (:meth:`second_pass`) reads each lit map again and sums
    its discs exactly at every location.
    """

    def __init__(
        self,
        groups: list[_MapGroup],
        grid: RetinalGrid,
        weight_s: np.ndarray,
        max_scale: np.ndarray,
        overlap: bool,
        diameters_um: Sequence[float],
        maxima_cache: dict | None = None,
    ):
        self.groups, self.grid = groups, grid
        self.cache = maxima_cache
        self.weight_s, self.max_scale, self.overlap = weight_s, max_scale, overlap
        self.diameters = list(diameters_um)
        self.integ = _DiscIntegrator(grid, max(self.diameters))
        self.search = grid.rows * grid.cols > _SEARCH_MIN_SAMPLES
        self.sums = [
            None
            if self.integ.is_point(d)
            else _disc_sums(d, grid.pitch_x_um, grid.pitch_y_um, grid.shape)
            for d in self.diameters
        ]
        self.dose = np.zeros(grid.shape, dtype=np.float64)
        self.peak = np.zeros(grid.shape, dtype=np.float64)
        self.lit: list[int] = []  # groups with light, in order
        self._held: tuple[int, np.ndarray] | None = None
        self._held_prefix: tuple[np.ndarray, np.ndarray] | None = None  # (map, its prefix sums)
        self._prefix_buf: np.ndarray | None = None  # one buffer for every map's prefix sums

    def _lit_frames(self, gi: int) -> list[int]:
        return [k for k in self.groups[gi].frames if self.max_scale[k] > 0]

    def _read(self, gi: int) -> np.ndarray:
        held = self._held
        self._held = None  # free the previous map before reading the next
        if held is not None and held[0] == gi:
            irr = held[1]
        else:
            self._held_prefix = None
            g = self.groups[gi]
            irr = np.ascontiguousarray(_load_map(g.source, self.grid.shape, g.field))
        self._held = (gi, irr)
        return irr

    def _accumulate(self, gi: int, irr: Any) -> bool:
        """Add the frames of group ``gi`` to the dose and peak maps; True if it is lit.

        The frames of one map add ``sum(weight) * map`` to the dose map and
        ``max(scale) * map`` (or, with overlapping pulses, ``sum(scale) * map``)
        to the peak map, in one fused pass.
        """
        weight = sum(float(self.weight_s[k]) for k in self.groups[gi].frames)
        scales = [float(self.max_scale[k]) for k in self.groups[gi].frames]
        scale = sum(scales) if self.overlap else max(scales, default=0.0)
        lit = np.zeros(1, dtype=np.bool_)
        _accumulate_map(self.dose, self.peak, irr, weight, scale, self.overlap, lit)
        return bool(self._lit_frames(gi)) and bool(lit[0])

    def _prefix_of(self, irr: np.ndarray) -> np.ndarray:
        """Row prefix sums of a map, written into the sweep's one buffer (every map
        has the grid's shape); the previous contents are gone."""
        if self._prefix_buf is None:
            self._prefix_buf = np.empty((irr.shape[0], irr.shape[1] + 1), dtype=np.float64)
        return prefix_sums(irr, out=self._prefix_buf)

    def _maxima(self, irr: np.ndarray, key: str | None = None) -> list[tuple[int, int, float]]:
        """Per angle, the centre and value of the largest disc power of ``irr``.

        With a ``key`` and a cache, the maxima of a keyed map found before (same
        grid and diameter) are taken from the cache.
        """
        g = self.grid
        tags = [(key, g.shape, g.pitch_x_um, g.pitch_y_um, d, self.search) for d in self.diameters]
        if key is not None and self.cache is not None and all(t in self.cache for t in tags):
            return [self.cache[t] for t in tags]
        out = []
        self._held_prefix = None
        prefix = self._prefix_of(irr)
        pooled = Pooled(irr) if self.search else None
        spec = None
        for d, sums in zip(self.diameters, self.sums, strict=True):
            if sums is None:  # a point: the sample's irradiance times the disc area
                r, c = _peak_location(irr)
                out.append((r, c, float(irr[r, c]) * _point_area_mm2(d)))
            elif self.search:
                out.append(search_max(irr, prefix, sums, pooled))
            else:
                f32 = irr if irr.dtype == np.float32 else irr.astype(np.float32)
                if spec is None:
                    spec = self.integ.spectrum(f32)
                r, c = _peak_location(self.integ.power_map_mw(f32, d, spec))
                out.append((r, c, float(sums.at(prefix, irr, [r], [c])[0])))
        if key is not None and self.cache is not None:
            self.cache.update(zip(tags, out, strict=True))
        self._held_prefix = (irr, prefix)
        return out

    def first_pass(self) -> list[_AngleMaps]:
        """Read every map once; the evaluation locations and maxima of every angle."""
        nd = len(self.diameters)
        max_power = [0.0] * nd
        locs: list[set[tuple[int, int]]] = [set() for _ in range(nd)]
        for gi in range(len(self.groups)):
            irr = self._read(gi)
            if not self._accumulate(gi, irr):
                continue
            self.lit.append(gi)
            top = max(self.max_scale[k] for k in self._lit_frames(gi))
            for j, (r, c, value) in enumerate(self._maxima(irr, self.groups[gi].key)):
                locs[j].add((r, c))
                max_power[j] = max(max_power[j], value * top)
        fixed = {_peak_location(self.dose), _peak_location(self.peak)}
        if len(self.lit) > 1:
            self._held = self._held_prefix = None
            for j, (r, c, _) in enumerate(self._maxima(self.dose)):
                locs[j].add((r, c))  # the disc-energy maximum
            self._held_prefix = None
        # with one lit map the dose map is a multiple of it (the disc integral is
        # linear), so its disc-energy maxima are that map's maxima, already listed;
        # the map (and its prefix sums) stay for pass 2
        out = []
        for j in range(nd):
            ordered = sorted(locs[j] | fixed)
            table = np.zeros((len(ordered), len(self.groups)), dtype=np.float64)
            out.append(_AngleMaps(float(max_power[j]), ordered, table))
        self.integ.forget()
        return out

    def second_pass(self, angles: list[_AngleMaps]) -> None:
        """Fill each angle's table with the exact disc power of every lit map at its locations."""
        for gi in reversed(self.lit):
            irr = self._read(gi)
            held, self._held_prefix = self._held_prefix, None
            prefix = held[1] if held is not None and held[0] is irr else self._prefix_of(irr)
            del held
            for a, d, sums in zip(angles, self.diameters, self.sums, strict=True):
                rr, cc = np.array(a.locations, dtype=np.intp).T
                if sums is None:
                    a.power_at[:, gi] = irr[rr, cc].astype(np.float64) * _point_area_mm2(d)
                else:
                    a.power_at[:, gi] = sums.at(prefix, irr, rr, cc)
            del prefix
        self._held = self._held_prefix = self._prefix_buf = None


def assess_sequence(
    frames: Sequence[Frame],
    grid: RetinalGrid,
    wavelength_nm: float,
    *,
    eye: EyeModel = HUMAN_EYE,
    protocol: ProtocolCap | None = None,
    alphas_mrad: Iterable[float] | None = None,
    subject: str | None = None,
    maxima_cache: dict | None = None,
) -> ExposureAssessment:
    """Assess a sequence of frames against the retinal limits (varying acceptance angle).

    Parameters
    ----------
    frames : sequence of Frame or (irradiance, pulses)
        Each frame's predicted retinal irradiance (mW/mm^2 at the frame's laser
        power, on ``grid``; an array or a zero-argument callable returning one,
        see :class:`Frame`) and its pulses (ms from the start of the sequence).
    grid : RetinalGrid
        Shared sampling of every map.
    wavelength_nm : float
        400-1400 nm.
    eye : EyeModel
        Reference eye for the cornea-to-retina conversion (human by default).
    protocol : ProtocolCap, optional
        A cap of the user's protocol, reported beside the standard.
    alphas_mrad : iterable of float, optional
        Acceptance angles; by default :func:`default_acceptance_angles_mrad`.
    subject : str, optional
        The eye the stimulus is for (``"rat"``, ``"mouse"``), named in the basis.
    maxima_cache : dict, optional
        Shared between calls that show the same maps under the same keys (e.g.
        a whole sequence and each stimulus's frames alone): the largest disc
        power of a keyed map, and its centre, are found once per grid and disc
        diameter. A key must then name the same map in every call.

    Returns
    -------
    ExposureAssessment

    Notes
    -----
    For each acceptance angle alpha, each frame's map is integrated over discs
    of diameter ``alpha * f_eye`` (:func:`disc_power_map`). Rules 1-3 are then
    evaluated on the time course of the disc power at a few locations per
    angle: the maximum of each frame's disc-power map, the maximum of the
    disc-energy map (the dose integrated over the disc), and the samples of
    largest dose and largest peak irradiance. This finds the worst location
    when one frame dominates it; a place lit moderately by many frames is
    covered by the disc-energy maximum. For 400-600 nm and sequences over
    10 s the photochemical limit is evaluated with discs of gamma_ph of the
    whole sequence (a larger disc than any shorter window's, so it errs
    high).

    Each frame's largest disc power and its centre are found, on maps of up
    to :data:`_SEARCH_MIN_SAMPLES` samples, from the full disc-power map (FFT
    convolution); on larger maps by the coarse-to-fine search of
    :func:`stimplan.disc_search.search_max` (a pooled disc-power map, then
    exact disc sums around its best local maxima), which can miss a maximum
    narrower than a pooled cell by a little (under 0.2 % on fully developed
    speckle in the tests). The disc-energy map of an angle is the disc-power
    map of the dose map (the disc integral is linear), so its maximum is
    found the same way. At every evaluation location the disc powers are
    exact sums of the area-weighted kernel (row prefix sums, float64).

    Memory does not grow with the number of frames. Frames that show one map
    (same key, same array, same callable, or callables returning the same
    array object) are treated as one map; to learn this, a lazy frame without
    a key is called once beforehand. The maps are then read twice, one at a
    time: pass 1 adds each to the dose and peak maps and finds its maxima for
    every angle; pass 2 sums each lit map's discs at the evaluation
    locations. Besides the dose and peak maps, one map, its row prefix sums
    (float64) and its pooled or transformed copies are alive at a time, plus
    per angle a table of disc powers (locations x distinct maps). The
    results do not depend on the order of the frames, except that the dose
    sums are formed map by map: when frames of one map are interleaved with
    frames of others, the dose map can differ from frame-order summation in
    the last bit.

    References
    ----------
    .. [1] ICNIRP, "Guidelines on limits of exposure to laser radiation of
       wavelengths between 180 nm and 1,000 um", Health Phys. 105, 271 (2013).
    .. [2] IEC 60825-1:2014, Safety of laser products, Annex A.
    """
    grid = _check_grid(grid)
    lam = _wavelength(wavelength_nm)
    eye = _check_eye(eye)
    if protocol is not None and not isinstance(protocol, ProtocolCap):
        raise ConfigError("protocol", protocol, "a ProtocolCap or None")
    items = _as_frames(frames, grid)
    all_pulses: list[Pulse] = []
    frame_of: list[int] = []
    for k, f in enumerate(items):
        all_pulses.extend(f.pulses)
        frame_of.extend([k] * len(f.pulses))
    if not all_pulses:
        raise ConfigError("frames", "no pulses", "at least one pulse in some frame")
    starts, durs = _timeline_arrays(all_pulses, "frames[].pulses")
    scales = np.array([p.scale for p in all_pulses], dtype=np.float64)
    frame_idx = np.asarray(frame_of, dtype=np.int64)
    t0 = float(starts.min())
    total = float(np.max(starts + durs) - t0)
    n_f = len(items)
    weight_s = np.bincount(frame_idx, weights=scales * durs, minlength=n_f)  # scale x s
    max_scale = np.zeros(n_f)
    np.maximum.at(max_scale, frame_idx, scales)
    overlap = _frames_overlap(starts, durs, frame_idx)
    notes: list[str] = []
    if overlap:
        notes.append("Pulses of different frames overlap in time: the peak map adds them.")

    # Acceptance angles.
    if alphas_mrad is None:
        alphas = default_acceptance_angles_mrad(
            np.unique(durs), total_duration_s=total, wavelength_nm=lam
        )
    else:
        alphas = tuple(sorted({_alpha(a, f"alphas_mrad[{k}]") for k, a in enumerate(alphas_mrad)}))
        if not alphas:
            raise ConfigError("alphas_mrad", [], "at least one angle")
    photo = _photochemical_applies(lam, total)
    gamma = _gamma_ph(total) if photo else None
    eval_angles = sorted(set(alphas) | ({gamma} if gamma is not None else set()))
    diameters = [retinal_image_diameter_um(a, eye) for a in eval_angles]

    # The maps, one at a time: dose and peak maps, and per angle the disc powers.
    groups = _map_groups(items)
    group_of = np.empty(n_f, dtype=np.int64)
    for gi, g in enumerate(groups):
        group_of[g.frames] = gi
    sweep = _MapSweep(groups, grid, weight_s, max_scale, overlap, diameters, maxima_cache)
    rules = {r: _empty_rule(r, alphas[0]) for r in RULES}
    angle_rows: list[AngleResult] = []
    results = sweep.first_pass()
    sweep.second_pass(results)
    lit_groups = np.zeros(len(groups), dtype=bool)
    lit_groups[sweep.lit] = True
    lit_frames = np.flatnonzero(lit_groups[group_of] & (max_scale > 0))
    for j, res in enumerate(results):
        a, d_um = eval_angles[j], diameters[j]
        hazards = []
        if a in alphas:
            hazards.append("thermal")
        if photo and a == gamma:
            hazards.append("photochemical")
        at_angle = {r: _empty_rule(r, a) for r in RULES}
        for n, (row, col) in enumerate(res.locations):
            frame_power = np.zeros(n_f)
            frame_power[lit_frames] = res.power_at[n, group_of[lit_frames]]
            powers = frame_power[frame_idx] * scales
            x, y = grid.point_of(row, col)
            for hz in hazards:
                out = _timeline_rules(starts, durs, powers, lam, a, eye, hz)
                out = {r: replace(out[r], x_um=float(x), y_um=float(y)) for r in RULES}
                at_angle = _merge_rules(at_angle, out)
        rules = _merge_rules(rules, at_angle)
        b = _binding(at_angle)
        angle_rows.append(AngleResult(a, d_um, res.max_power_mw, b.ratio, b.rule, b.hazard))
    dose, peak = sweep.dose, sweep.peak

    worst = _binding(rules)
    verdict_std = _verdict(worst.ratio)
    prot = None
    if protocol is not None:
        prot = _protocol_result(protocol, peak, dose, total, grid)
    overall = (
        "above" if (verdict_std == "above" or (prot and prot.verdict == "above")) else "within"
    )
    notes += [
        "Rules 1-3 are evaluated on the time course at, for each acceptance angle, the "
        "maximum of each frame's disc-power map, the maximum of the disc-energy map and the "
        "samples of largest dose and largest peak irradiance.",
        "The disc powers at these locations are exact sums of the area-weighted disc."
        + (
            " On this large grid the maxima are found by a coarse-to-fine search (a pooled "
            "disc-power map, then exact sums around its best local maxima), which can miss a "
            "maximum narrower than a pooled cell by a small fraction (up to 0.2 % on fully "
            "developed speckle in the tests)."
            if sweep.search
            else ""
        ),
        "Acceptance angles (mrad): "
        + ", ".join(f"{a:.3g}" for a in eval_angles)
        + "; the ratio is not evaluated between them.",
        "A disc smaller than one grid sample is a point: the sample's irradiance times the "
        "disc area.",
        "Rule 2 windows run from each pulse start to each later pulse end; rule 3 counts N "
        "within T2 (from memory) and pulses dimmer than 1e-4 of the brightest at a location "
        "are not counted.",
    ]
    if photo:
        notes.append(
            f"Photochemical limits (400-600 nm, over 10 s) evaluated with gamma_ph = "
            f"{gamma:.3g} mrad for every window (errs high for shorter windows)."
        )
    if prot is not None:
        notes.append(
            "The protocol cap is evaluated per grid sample; the time average is over the "
            "whole sequence (first pulse start to last pulse end)."
        )
    return ExposureAssessment(
        wavelength_nm=lam,
        grid=grid,
        n_frames=n_f,
        n_pulses=len(all_pulses),
        duration_s=total,
        dose_map_mj_per_mm2=dose.astype(np.float32),
        peak_irradiance_map_mw_per_mm2=peak.astype(np.float32),
        rules=rules,
        worst=worst,
        worst_ratio=worst.ratio,
        margin=_margin(worst.ratio),
        binding_rule=worst.rule,
        verdict_standard=verdict_std,
        protocol=prot,
        verdict=overall,
        angles=tuple(angle_rows),
        basis=_basis_text(eye, subject),
        notes=tuple(notes),
    )


def _peak_location(values: np.ndarray) -> tuple[int, int]:
    """Index of the maximum; among samples tied with it (to 1e-5), the one nearest their centroid.

    A disc larger than a hot spot holds the same power at many centres; this
    reports the centre of that plateau (the spot itself, or the middle of a
    uniform field) rather than an arbitrary corner of it. The tied samples are
    counted and visited in compiled passes, without index arrays.
    """
    rows, cols = values.shape
    flat = int(np.argmax(values))
    top = float(values.flat[flat])
    if top <= 0:
        return divmod(flat, cols)
    thr = values.dtype.type(top * (1 - 1e-5))  # compared in the map's own precision
    r, c = _tied_centre(np.ascontiguousarray(values), thr)
    return (int(r), int(c)) if r >= 0 else divmod(flat, cols)


@nb.njit(cache=True, nogil=True)
def _tied_centre(values, thr):  # pragma: no cover - compiled
    """Among samples ``>= thr``, the first (row-major) nearest their centroid; ``(-1, -1)``
    if only one sample is tied (integer index sums are exact)."""
    rows, cols = values.shape
    n = 0
    sum_r = 0
    sum_c = 0
    for i in range(rows):
        for j in range(cols):
            if values[i, j] >= thr:
                n += 1
                sum_r += i
                sum_c += j
    if n <= 1:
        return -1, -1
    r_mean = sum_r / n
    c_mean = sum_c / n
    best = np.inf
    br = bc = 0
    for i in range(rows):
        for j in range(cols):
            if values[i, j] >= thr:
                d2 = (i - r_mean) ** 2 + (j - c_mean) ** 2
                if d2 < best:
                    best = d2
                    br, bc = i, j
    return br, bc


def _frames_overlap(starts: np.ndarray, durs: np.ndarray, frame_idx: np.ndarray) -> bool:
    order = np.argsort(starts, kind="stable")
    s, e, f = starts[order], (starts + durs)[order], frame_idx[order]
    run_end = np.maximum.accumulate(e)
    clash = (s[1:] < run_end[:-1] - _TIME_TOL_S) & (f[1:] != f[:-1])
    return bool(np.any(clash))


def _protocol_result(
    cap: ProtocolCap, peak: np.ndarray, dose: np.ndarray, total_s: float, grid: RetinalGrid
) -> ProtocolResult:
    kp = _peak_location(peak)
    kd = _peak_location(dose)
    peak_val = float(peak[kp])
    mean_val = float(dose[kd]) / total_s  # mJ/mm^2 / s = mW/mm^2
    pr = (
        None
        if cap.peak_irradiance_mw_per_mm2 is None
        else peak_val / cap.peak_irradiance_mw_per_mm2
    )
    mr = (
        None
        if cap.mean_irradiance_mw_per_mm2 is None
        else mean_val / cap.mean_irradiance_mw_per_mm2
    )
    worst = max(r for r in (pr, mr) if r is not None)
    return ProtocolResult(
        cap=cap,
        peak_irradiance_mw_per_mm2=peak_val,
        mean_irradiance_mw_per_mm2=mean_val,
        peak_ratio=pr,
        mean_ratio=mr,
        worst_ratio=worst,
        verdict=_verdict(worst),
        peak_at_um=tuple(float(c) for c in grid.point_of(*kp)),
        mean_at_um=tuple(float(c) for c in grid.point_of(*kd)),
    )


def evaluate_map(
    irradiance_mw_per_mm2: Any,
    grid: RetinalGrid,
    wavelength_nm: float,
    duration_s: float,
    *,
    eye: EyeModel = HUMAN_EYE,
    protocol: ProtocolCap | None = None,
    alphas_mrad: Iterable[float] | None = None,
    subject: str | None = None,
) -> ExposureAssessment:
    """Extended-source evaluation of one predicted retina shown once for ``duration_s``.

    The varying-acceptance-angle method: for each acceptance angle the largest
    power within a disc of diameter ``alpha * f_eye`` anywhere on the map is
    compared with the limit for that angle. ``result.worst`` gives the worst
    ratio with ``x_um``, ``y_um``, ``alpha_mrad`` and the rule;
    ``result.angles`` the figures per angle. See :func:`assess_sequence`.

    References
    ----------
    .. [1] ICNIRP (2013); IEC 60825-1:2014, Annex A.
    """
    t = _duration(duration_s)
    return assess_sequence(
        [Frame(irradiance_mw_per_mm2, (Pulse(0.0, t * 1e3),))],
        grid,
        wavelength_nm,
        eye=eye,
        protocol=protocol,
        alphas_mrad=alphas_mrad,
        subject=subject,
    )


# --------------------------------------------------------------------------
# Power planning
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class PerMilliwatt:
    """Quantities per mW of laser power (everything here is linear in laser power).

    Parameters
    ----------
    irradiance_mw_per_mm2 : float
        Retinal irradiance per mW of laser power (e.g. the mean or the minimum
        over ON pixels), mW/mm^2 per mW, > 0.
    worst_ratio : float
        Worst exposure/limit ratio of the standard per mW, >= 0.
    protocol_ratio : float, optional
        Worst ratio to a protocol cap per mW.
    label : str
        ``"hologram"``, ``"amplitude mask"``, ...
    irradiance_basis : str
        What ``irradiance_mw_per_mm2`` is (``"mean ON-pixel irradiance"``).
    """

    irradiance_mw_per_mm2: float
    worst_ratio: float
    protocol_ratio: float | None = None
    label: str = "hologram"
    irradiance_basis: str = "mean ON-pixel irradiance"

    def __post_init__(self) -> None:
        object.__setattr__(
            self,
            "irradiance_mw_per_mm2",
            v.number(
                f"{self.label}.irradiance_mw_per_mm2 (per mW)",
                self.irradiance_mw_per_mm2,
                lo=0.0,
                lo_open=True,
            ),
        )
        object.__setattr__(
            self,
            "worst_ratio",
            v.number(f"{self.label}.worst_ratio (per mW)", self.worst_ratio, lo=0.0),
        )
        if self.protocol_ratio is not None:
            object.__setattr__(
                self,
                "protocol_ratio",
                v.number(f"{self.label}.protocol_ratio (per mW)", self.protocol_ratio, lo=0.0),
            )

    @classmethod
    def from_assessment(
        cls,
        assessment: ExposureAssessment,
        laser_power_mw: float,
        irradiance_mw_per_mm2: float,
        *,
        label: str = "hologram",
        irradiance_basis: str = "mean ON-pixel irradiance",
    ) -> PerMilliwatt:
        """Divide an assessment made at ``laser_power_mw`` by that power."""
        p = v.number("laser_power_mw", laser_power_mw, lo=0.0, lo_open=True)
        e = v.number("irradiance_mw_per_mm2", irradiance_mw_per_mm2, lo=0.0, lo_open=True)
        return cls(
            e / p,
            assessment.worst_ratio / p,
            None if assessment.protocol is None else assessment.protocol.worst_ratio / p,
            label,
            irradiance_basis,
        )


@dataclass(frozen=True)
class PowerPlan:
    """Laser power for a target irradiance, and the largest power within every limit."""

    label: str
    irradiance_basis: str
    target_irradiance_mw_per_mm2: float
    laser_power_mw: float
    worst_ratio: float
    protocol_ratio: float | None
    max_laser_power_standard_mw: float
    max_laser_power_mw: float
    max_irradiance_mw_per_mm2: float
    margin: float
    verdict: str
    laser_max_mw: float | None
    reachable: bool
    per_mw: PerMilliwatt
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    def describe(self) -> str:
        text = (
            f"{self.label}: {self.laser_power_mw:.4g} mW of laser power for "
            f"{self.target_irradiance_mw_per_mm2:.4g} mW/mm^2 ({self.irradiance_basis}); "
            f"exposure {self.worst_ratio:.3g} of the limit"
        )
        if self.protocol_ratio is not None:
            text += f", {self.protocol_ratio:.3g} of the protocol cap"
        text += (
            f"; {self.verdict}; largest power within every limit "
            f"{self.max_laser_power_mw:.4g} mW (= {self.max_irradiance_mw_per_mm2:.4g} mW/mm^2)"
        )
        if not self.reachable:
            text += f"; the laser gives only {self.laser_max_mw:.4g} mW"
        return text

    def summary(self) -> str:
        return "\n".join([f"Power plan ({self.edition})", "  " + self.describe(), CAUTIONS])


def plan_power(
    target_irradiance_mw_per_mm2: float,
    per_mw: PerMilliwatt,
    *,
    laser_max_mw: float | None = None,
) -> PowerPlan:
    """Laser power for a target irradiance and the largest power within every limit.

    Parameters
    ----------
    target_irradiance_mw_per_mm2 : float
        Wanted retinal irradiance (of the kind ``per_mw.irradiance_basis``), > 0.
    per_mw : PerMilliwatt
        Irradiance and exposure ratios per mW of laser power.
    laser_max_mw : float, optional
        What the laser can deliver.

    Returns
    -------
    PowerPlan
        ``laser_power_mw = target / irradiance_per_mw``; the exposure ratio at
        that power is ``worst_ratio_per_mw * laser_power_mw``; the largest power
        within the standard is ``1 / worst_ratio_per_mw`` and, with a protocol,
        the smaller of that and ``1 / protocol_ratio_per_mw``.

    References
    ----------
    .. [1] common practice: irradiance and exposure are linear in laser power.
    """
    target = v.number(
        "target_irradiance_mw_per_mm2", target_irradiance_mw_per_mm2, lo=0.0, lo_open=True
    )
    if not isinstance(per_mw, PerMilliwatt):
        raise ConfigError("per_mw", per_mw, "a PerMilliwatt")
    lmax = (
        None
        if laser_max_mw is None
        else v.number("laser_max_mw", laser_max_mw, lo=0.0, lo_open=True)
    )
    power = target / per_mw.irradiance_mw_per_mm2
    ratio = per_mw.worst_ratio * power
    pratio = None if per_mw.protocol_ratio is None else per_mw.protocol_ratio * power
    p_std = math.inf if per_mw.worst_ratio == 0 else 1.0 / per_mw.worst_ratio
    p_max = p_std
    if per_mw.protocol_ratio:
        p_max = min(p_max, 1.0 / per_mw.protocol_ratio)
    worst = max(ratio, pratio or 0.0)
    return PowerPlan(
        label=per_mw.label,
        irradiance_basis=per_mw.irradiance_basis,
        target_irradiance_mw_per_mm2=target,
        laser_power_mw=power,
        worst_ratio=ratio,
        protocol_ratio=pratio,
        max_laser_power_standard_mw=p_std,
        max_laser_power_mw=p_max,
        max_irradiance_mw_per_mm2=p_max * per_mw.irradiance_mw_per_mm2,
        margin=_margin(ratio),
        verdict=_verdict(worst),
        laser_max_mw=lmax,
        reachable=lmax is None or power <= lmax,
        per_mw=per_mw,
    )


@dataclass(frozen=True)
class PowerComparison:
    """A hologram and an amplitude-mask baseline planned for the same target."""

    hologram: PowerPlan
    baseline: PowerPlan
    power_ratio: float
    safe_irradiance_ratio: float
    edition: str = EDITION
    caution: str = field(default=CAUTION_SHORT, repr=False)

    def summary(self) -> str:
        return "\n".join(
            [
                f"Power plan, hologram beside {self.baseline.label} ({self.edition})",
                "  " + self.hologram.describe(),
                "  " + self.baseline.describe(),
                f"  the {self.baseline.label} needs {self.power_ratio:.3g}x the laser power; "
                f"the hologram reaches {self.safe_irradiance_ratio:.3g}x its irradiance "
                "within every limit",
                CAUTIONS,
            ]
        )


def compare_power(
    target_irradiance_mw_per_mm2: float,
    hologram: PerMilliwatt,
    baseline: PerMilliwatt,
    *,
    laser_max_mw: float | None = None,
) -> PowerComparison:
    """:func:`plan_power` for a hologram and an amplitude-mask baseline side by side.

    Returns
    -------
    PowerComparison
        Both plans, the ratio of laser powers needed (baseline / hologram) and
        the ratio of the largest irradiances within every limit (hologram /
        baseline).

    References
    ----------
    .. [1] common practice: irradiance and exposure are linear in laser power.
    """
    h = plan_power(target_irradiance_mw_per_mm2, hologram, laser_max_mw=laser_max_mw)
    b = plan_power(target_irradiance_mw_per_mm2, baseline, laser_max_mw=laser_max_mw)
    safe = (
        math.inf
        if b.max_irradiance_mw_per_mm2 == 0
        else h.max_irradiance_mw_per_mm2 / b.max_irradiance_mw_per_mm2
    )
    return PowerComparison(h, b, b.laser_power_mw / h.laser_power_mw, safe)

"""Visual-acuity conversions: logMAR, MAR, Snellen, decimal, gratings.

Letter acuity
    MAR (minimum angle of resolution) is the stroke and gap size of an
    optotype in arcmin. ``logMAR = log10(MAR)``; Snellen ``20/x`` (or ``6/x``)
    means ``MAR = x/20`` (``x/6``) arcmin; decimal acuity is ``1/MAR``.
Gratings
    A grating of ``c`` cycles per degree has a period of ``um_per_deg / c``
    retinal µm and a bar width (half period) of ``um_per_deg / (2 c)``. Its
    letter-acuity equivalent takes the bar width as the MAR, so 30 cycles/deg
    corresponds to 1 arcmin (logMAR 0, 20/20).
Implants
    The finest grating a photovoltaic array resolves has a bar width of about
    one pixel pitch (period two pitches), the sampling (Nyquist) limit.

Every function that needs the retinal scale takes ``eye``: a
:class:`stimplan.optics.system.Eye` or a plain number of µm per degree.

References
----------
.. [1] I. L. Bailey and J. E. Lovie, "New design principles for visual acuity
   letter charts", *Am. J. Optom. Physiol. Opt.* 53, 740 (1976).
.. [2] ISO 8596, *Ophthalmic optics - Visual acuity testing - Standard and
   clinical optotypes and their presentation*.
.. [3] H. Lorach et al., "Photovoltaic restoration of sight with high visual
   acuity", *Nat. Med.* 21, 476 (2015).
.. [4] E. Ho et al., "Grating acuity of prosthetic vision in blind rats
   matches the pixel pitch of photovoltaic subretinal arrays below 50 µm",
   *J. Neural Eng.* 16, 066027 (2019).
"""

from __future__ import annotations

import math
import re
from typing import Any, NamedTuple

from . import validate
from .errors import ConfigError
from .optics.system import Eye

__all__ = [
    "ARCMIN_PER_DEG",
    "GRATING_CPD_AT_MAR_1",
    "GratingAcuity",
    "logmar_from_mar",
    "mar_from_logmar",
    "parse_snellen",
    "mar_from_snellen",
    "snellen_from_mar",
    "snellen_text",
    "logmar_from_snellen",
    "snellen_from_logmar",
    "decimal_from_mar",
    "mar_from_decimal",
    "logmar_from_decimal",
    "decimal_from_logmar",
    "um_per_deg_of",
    "arcmin_to_um",
    "um_to_arcmin",
    "period_um_from_cpd",
    "cpd_from_period_um",
    "bar_width_um_from_cpd",
    "cpd_from_bar_width_um",
    "bar_width_px_from_um",
    "bar_width_um_from_px",
    "cpd_from_bar_width_px",
    "bar_width_px_from_cpd",
    "logmar_from_cpd",
    "cpd_from_logmar",
    "nyquist_acuity",
    "implant_acuity",
]

ARCMIN_PER_DEG = 60.0

#: Grating frequency whose bar width is 1 arcmin: 60 / 2 = 30 cycles/deg.
GRATING_CPD_AT_MAR_1 = ARCMIN_PER_DEG / 2.0


class GratingAcuity(NamedTuple):
    """A grating acuity and its letter-acuity equivalent.

    Attributes
    ----------
    cycles_per_deg : float
        Grating frequency.
    logmar : float
        logMAR equivalent (bar width taken as the MAR).
    bar_width_um : float
        Bar width (half period) on the retina, µm.
    """

    cycles_per_deg: float
    logmar: float
    bar_width_um: float


# -- letter acuity ---------------------------------------------------------


def logmar_from_mar(mar_arcmin: float) -> float:
    """logMAR of a minimum angle of resolution, ``log10(MAR)``.

    References
    ----------
    .. [1] Bailey & Lovie, *Am. J. Optom. Physiol. Opt.* 53, 740 (1976).
    """
    mar = validate.number("mar_arcmin", mar_arcmin, lo=0, lo_open=True)
    return math.log10(mar)


def mar_from_logmar(logmar: float) -> float:
    """MAR in arcmin of a logMAR value, ``10**logMAR``."""
    lm = validate.number("logmar", logmar, lo=-2.0, hi=4.0)
    return 10.0**lm


_SNELLEN_RE = re.compile(r"^\s*([0-9]*\.?[0-9]+)\s*/\s*([0-9]*\.?[0-9]+)\s*$")


def parse_snellen(snellen: Any, field: str = "snellen") -> tuple[float, float]:
    """``(test distance, letter distance)`` of a Snellen fraction.

    Parameters
    ----------
    snellen : str or tuple of two numbers
        ``"20/40"``, ``"6/12"`` or ``(20, 40)``.
    field : str
        Field path for error messages.

    Returns
    -------
    tuple of float
        Numerator and denominator, both > 0.
    """
    if isinstance(snellen, str):
        m = _SNELLEN_RE.match(snellen)
        if m is None:
            raise ConfigError(field, snellen, "a Snellen fraction such as '20/40' or '6/12'")
        num, den = float(m.group(1)), float(m.group(2))
    elif isinstance(snellen, (tuple, list)) and len(snellen) == 2:
        num, den = snellen
    else:
        raise ConfigError(field, snellen, "a Snellen fraction such as '20/40' or (20, 40)")
    num = validate.number(f"{field}.numerator", num, lo=0, lo_open=True)
    den = validate.number(f"{field}.denominator", den, lo=0, lo_open=True)
    return num, den


def mar_from_snellen(snellen: Any) -> float:
    """MAR in arcmin of a Snellen fraction: ``20/x`` → ``x/20``, ``6/x`` → ``x/6``.

    References
    ----------
    .. [1] Bailey & Lovie, *Am. J. Optom. Physiol. Opt.* 53, 740 (1976).
    """
    num, den = parse_snellen(snellen)
    return den / num


def snellen_from_mar(mar_arcmin: float, numerator: float = 20.0) -> float:
    """Snellen denominator for a MAR: ``numerator × MAR`` (20/x or 6/x)."""
    mar = validate.number("mar_arcmin", mar_arcmin, lo=0, lo_open=True)
    num = validate.number("snellen.numerator", numerator, lo=0, lo_open=True)
    return num * mar


def snellen_text(mar_arcmin: float, numerator: float = 20.0) -> str:
    """A Snellen fraction as text, e.g. ``"20/40"`` (denominator rounded)."""
    den = snellen_from_mar(mar_arcmin, numerator)
    return f"{numerator:g}/{den:.0f}" if den >= 10 else f"{numerator:g}/{den:.3g}"


def logmar_from_snellen(snellen: Any) -> float:
    """logMAR of a Snellen fraction (20/20 → 0, 20/200 → 1)."""
    return math.log10(mar_from_snellen(snellen))


def snellen_from_logmar(logmar: float, numerator: float = 20.0) -> float:
    """Snellen denominator for a logMAR value (``numerator × 10**logMAR``)."""
    return snellen_from_mar(mar_from_logmar(logmar), numerator)


def decimal_from_mar(mar_arcmin: float) -> float:
    """Decimal acuity, ``1 / MAR``."""
    mar = validate.number("mar_arcmin", mar_arcmin, lo=0, lo_open=True)
    return 1.0 / mar


def mar_from_decimal(decimal: float) -> float:
    """MAR in arcmin of a decimal acuity, ``1 / decimal``."""
    d = validate.number("decimal", decimal, lo=0, lo_open=True)
    return 1.0 / d


def logmar_from_decimal(decimal: float) -> float:
    """logMAR of a decimal acuity, ``-log10(decimal)``."""
    return math.log10(mar_from_decimal(decimal))


def decimal_from_logmar(logmar: float) -> float:
    """Decimal acuity of a logMAR value, ``10**-logMAR``."""
    return 1.0 / mar_from_logmar(logmar)


# -- retinal scale ---------------------------------------------------------


def um_per_deg_of(eye: Eye | float, field: str = "eye") -> float:
    """Retinal µm per degree of an :class:`Eye` or of a plain number."""
    if isinstance(eye, Eye):
        return eye.um_per_deg
    if eye is None:
        raise ConfigError(field, None, "an Eye or a number of µm per degree > 0")
    return validate.number(f"{field}.um_per_deg", eye, lo=0, lo_open=True)


def arcmin_to_um(arcmin: float, eye: Eye | float) -> float:
    """Retinal length in µm of a visual angle in arcmin."""
    a = validate.number("arcmin", arcmin)
    return a / ARCMIN_PER_DEG * um_per_deg_of(eye)


def um_to_arcmin(um: float, eye: Eye | float) -> float:
    """Visual angle in arcmin of a retinal length in µm."""
    x = validate.number("um", um)
    return x / um_per_deg_of(eye) * ARCMIN_PER_DEG


# -- gratings --------------------------------------------------------------


def period_um_from_cpd(cycles_per_deg: float, eye: Eye | float) -> float:
    """Retinal period in µm of a grating of ``cycles_per_deg``."""
    c = validate.number("cycles_per_deg", cycles_per_deg, lo=0, lo_open=True)
    return um_per_deg_of(eye) / c


def cpd_from_period_um(period_um: float, eye: Eye | float) -> float:
    """Cycles per degree of a grating with a retinal period in µm."""
    p = validate.number("period_um", period_um, lo=0, lo_open=True)
    return um_per_deg_of(eye) / p


def bar_width_um_from_cpd(cycles_per_deg: float, eye: Eye | float) -> float:
    """Bar width (half period) in µm of a grating of ``cycles_per_deg``."""
    return period_um_from_cpd(cycles_per_deg, eye) / 2.0


def cpd_from_bar_width_um(bar_width_um: float, eye: Eye | float) -> float:
    """Cycles per degree of a grating whose bar width (half period) is given in µm."""
    b = validate.number("bar_width_um", bar_width_um, lo=0, lo_open=True)
    return cpd_from_period_um(2.0 * b, eye)


def bar_width_px_from_um(bar_width_um: float, pitch_um: float) -> float:
    """Bar width in implant pixels (pitches) of a bar width in µm."""
    b = validate.number("bar_width_um", bar_width_um, lo=0, lo_open=True)
    p = validate.number("pitch_um", pitch_um, lo=0, lo_open=True)
    return b / p


def bar_width_um_from_px(bar_width_px: float, pitch_um: float) -> float:
    """Bar width in µm of a bar width given in implant pixels (pitches)."""
    b = validate.number("bar_width_px", bar_width_px, lo=0, lo_open=True)
    p = validate.number("pitch_um", pitch_um, lo=0, lo_open=True)
    return b * p


def cpd_from_bar_width_px(bar_width_px: float, pitch_um: float, eye: Eye | float) -> float:
    """Cycles per degree of a grating whose bars are ``bar_width_px`` pixels wide."""
    return cpd_from_bar_width_um(bar_width_um_from_px(bar_width_px, pitch_um), eye)


def bar_width_px_from_cpd(cycles_per_deg: float, pitch_um: float, eye: Eye | float) -> float:
    """Bar width in implant pixels of a grating of ``cycles_per_deg``."""
    return bar_width_px_from_um(bar_width_um_from_cpd(cycles_per_deg, eye), pitch_um)


def logmar_from_cpd(cycles_per_deg: float) -> float:
    """logMAR equivalent of a grating acuity: ``log10(30 / cpd)``.

    The bar width is taken as the MAR, so that 30 cycles/deg is 1 arcmin
    (20/20). This is the usual equivalence; grating and letter acuities of a
    given observer need not agree.
    """
    c = validate.number("cycles_per_deg", cycles_per_deg, lo=0, lo_open=True)
    return math.log10(GRATING_CPD_AT_MAR_1 / c)


def cpd_from_logmar(logmar: float) -> float:
    """Grating frequency equivalent to a logMAR value: ``30 / 10**logMAR``."""
    return GRATING_CPD_AT_MAR_1 / mar_from_logmar(logmar)


def nyquist_acuity(pitch_um: float, eye: Eye | float) -> GratingAcuity:
    """Sampling-limited grating acuity of an array of pixels with ``pitch_um``.

    The finest grating has a bar width of one pixel pitch (period
    ``2 × pitch_um``).

    Parameters
    ----------
    pitch_um : float
        Pixel pitch (centre-to-centre distance), µm.
    eye : Eye or float
        The eye, or its µm per degree.

    Returns
    -------
    GratingAcuity

    References
    ----------
    .. [1] Lorach et al., *Nat. Med.* 21, 476 (2015).
    .. [2] Ho et al., *J. Neural Eng.* 16, 066027 (2019).
    """
    p = validate.number("pitch_um", pitch_um, lo=0, lo_open=True)
    cpd = cpd_from_bar_width_um(p, eye)
    return GratingAcuity(cycles_per_deg=cpd, logmar=logmar_from_cpd(cpd), bar_width_um=p)


def implant_acuity(implant: Any, eye: Eye | float) -> GratingAcuity:
    """Sampling-limited grating acuity of an implant (anything with ``pitch_um``)."""
    pitch = getattr(implant, "pitch_um", None)
    if pitch is None:
        raise ConfigError("implant", implant, "an Implant (with pitch_um)")
    return nyquist_acuity(pitch, eye)

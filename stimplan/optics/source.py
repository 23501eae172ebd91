"""The light source: its polarisation and its spatial coherence, in closed form.

Polarisation
    A phase-only LCoS SLM (parallel-aligned nematic) changes the phase of the
    light polarised along its liquid crystal's director only; the orthogonal
    polarisation sees a fixed index, is reflected as by a flat mirror and goes
    to the zero order. Light of degree of polarisation ``P`` is a fully
    polarised part ``P`` plus an unpolarised part ``1 - P`` [1]_. When the
    polarised part makes the angle ``θ`` with the director, Malus's law passes
    ``cos² θ`` of it to the modulated polarisation, and the unpolarised part
    gives half, so the modulated share is

    ``m = P cos² θ + (1 - P) / 2 = (1 + P cos 2θ) / 2``.

    The ideal case is a polarised laser aligned with the director
    (``P = 1``, ``θ = 0``: ``m = 1``). A multimode fibre mixes the
    polarisation of the light it guides [4]_, so a fibre-coupled multimode
    diode is close to unpolarised (``P ≈ 0``: half the light is not
    modulated) unless a polariser follows it.

Spatial coherence
    A source that is not a single transverse mode illuminates the SLM with
    light of a spread of directions. For a Schell-model source (a degree of
    coherence that depends on the separation of two points only), the
    far-field intensity is the coherent far field of the SLM's field
    convolved with the angular spectrum of the degree of coherence [2]_: the
    retinal map is blurred by the source's angular distribution scaled by the
    effective focal length ``f_eff`` (an angle ``θ`` at the SLM lands
    ``f_eff θ`` from where it would, since the relay divides angles by its
    magnification and ``f_eff = f_eye / M``).

    * Beam quality ``M²`` (ISO 11146 [3]_): the beam diverges with the
      half-angle ``θ = M² λ / (π w0)`` for the 1/e² waist radius ``w0`` on the
      SLM. For a Gaussian Schell-model beam the squared far-field widths add:
      the coherent beam's own ``λ / (π w0)`` is already in the coherent
      prediction, so the blur is Gaussian with the rest,
      ``θ_blur = (λ / (π w0)) sqrt(M⁴ - 1)`` (1/e² half-angle, ``M⁴ = (M²)²``), i.e. a kernel
      of standard deviation ``σ = f_eff λ sqrt(M⁴ - 1) / (2 π w0)`` per axis.
    * A step-index multimode fibre of core diameter ``d`` and numerical
      aperture ``NA``, collimated onto the SLM: the core is an incoherent disc
      in the collimator's focal plane, so (van Cittert-Zernike [2]_) the
      angular distribution at the SLM is a uniform disc of half-angle
      ``(d/2) / f_c``. The collimator of focal length ``f_c`` makes a beam of
      radius ``R = f_c NA``, so the half-angle is ``(d/2) NA / R``
      (conservation of the beam parameter product ``(d/2) NA``), and the blur
      a uniform disc of radius ``f_eff (d/2) NA / R``. ``R`` is taken as the
      illumination's ``waist_mm``.

References
----------
.. [1] M. Born and E. Wolf, *Principles of Optics*, 7th ed., Cambridge
   (1999), §10.9 (partially polarised light: a polarised and an unpolarised
   part; degree of polarisation) and §1.4 (Malus's law); section numbers from
   memory.
.. [2] L. Mandel and E. Wolf, *Optical Coherence and Quantum Optics*,
   Cambridge (1995), §4.4 (van Cittert-Zernike theorem) and §5.3-5.6
   (Schell-model and Gaussian Schell-model sources, far-field radiant
   intensity); section numbers from memory.
.. [3] ISO 11146-1:2005, *Lasers and laser-related equipment - Test methods
   for laser beam widths, divergence angles and beam propagation ratios*
   (beam propagation ratio ``M² = π w0 θ / λ``); A. E. Siegman, "New
   developments in laser resonators", *Proc. SPIE* 1224, 2 (1990); both from
   memory.
.. [4] W. Xiong, C. W. Hsu, Y. Bromberg, J. E. Antonio-Lopez, R. Amezcua
   Correa and H. Cao, "Complete polarization control in multimode fibers
   with polarization and mode coupling", *Light Sci. Appl.* 7, 54 (2018)
   (abstract: imperfections and perturbations "cause random polarization
   and mode mixing").
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

from .. import validate
from ..errors import ConfigError

__all__ = [
    "SourceBlur",
    "NO_BLUR",
    "modulated_share",
    "gaussian_blur_sigma_um",
    "fibre_blur_radius_um",
]


@dataclass(frozen=True)
class SourceBlur:
    """The blur of the retinal map by the source's angular spread.

    Parameters
    ----------
    kind : {"none", "gaussian", "disc"}
        No blur (a single transverse mode), a Gaussian kernel (``M²``) or a
        uniform disc (a multimode fibre).
    size_um : float
        The Gaussian's standard deviation per axis, or the disc's radius,
        retinal µm (0 for ``"none"``).
    """

    kind: Literal["none", "gaussian", "disc"] = "none"
    size_um: float = 0.0

    def __post_init__(self) -> None:
        validate.choice("source_blur.kind", self.kind, ("none", "gaussian", "disc"))
        size = validate.number("source_blur.size_um", self.size_um, lo=0)
        if self.kind != "none" and size <= 0:
            raise ConfigError("source_blur.size_um", size, f"> 0 for a blur of kind {self.kind!r}")
        object.__setattr__(self, "size_um", size)

    @property
    def active(self) -> bool:
        return self.kind != "none"

    @property
    def rms_width_um(self) -> float:
        """Standard deviation of the kernel along one axis, µm.

        A Gaussian's ``σ``; a uniform disc of radius ``R`` has ``R / 2``
        (its second moment along one axis is ``R² / 4``).
        """
        if self.kind == "disc":
            return self.size_um / 2.0
        return self.size_um

    def describe(self) -> str:
        if self.kind == "gaussian":
            return f"Gaussian, sigma {self.size_um:.3g} um"
        if self.kind == "disc":
            return f"uniform disc, radius {self.size_um:.3g} um"
        return "none (single transverse mode)"


#: A single transverse mode: no blur.
NO_BLUR = SourceBlur()


def modulated_share(degree_of_polarisation: float, angle_deg: float = 0.0) -> float:
    """Share of the light in the polarisation the SLM modulates, ``(1 + P cos 2θ) / 2``.

    Parameters
    ----------
    degree_of_polarisation : float
        ``P`` in [0, 1] (0 unpolarised, 1 fully polarised).
    angle_deg : float
        Angle between the polarised part's direction and the SLM's liquid
        crystal director, degrees.

    Returns
    -------
    float
        ``m`` in [0, 1]; ``1 - m`` goes to the zero order.

    References
    ----------
    .. [1] Born & Wolf, *Principles of Optics*, 7th ed., §10.9 and §1.4
       (from memory).
    """
    p = validate.number("illumination.degree_of_polarisation", degree_of_polarisation, lo=0, hi=1)
    theta = math.radians(
        validate.physical("illumination.polarisation_angle_deg", angle_deg, "angle_deg")
    )
    return min(max(0.5 * (1.0 + p * math.cos(2.0 * theta)), 0.0), 1.0)


def gaussian_blur_sigma_um(
    *, wavelength_nm: float, waist_mm: float, m_squared: float, effective_focal_mm: float
) -> float:
    """Standard deviation of the Gaussian blur of a beam of quality ``M²``, retinal µm.

    ``σ = f_eff λ sqrt(M⁴ - 1) / (2 π w0)``: the far-field half-angle
    ``M² λ / (π w0)`` less, in quadrature, the coherent beam's own
    ``λ / (π w0)``, as a standard deviation (half the 1/e² radius).

    Parameters
    ----------
    wavelength_nm : float
        Vacuum wavelength, nm.
    waist_mm : float
        1/e² intensity radius of the beam at the SLM (its waist), mm.
    m_squared : float
        Beam propagation ratio, >= 1.
    effective_focal_mm : float
        ``f_eye / M``, mm.

    Returns
    -------
    float
        µm (0 for ``M² = 1``).

    References
    ----------
    .. [1] ISO 11146-1:2005; Mandel & Wolf (1995), §5.6 (Gaussian Schell-model
       beams); both from memory.
    """
    wl_mm = validate.number("illumination.wavelength_nm", wavelength_nm, lo=0, lo_open=True) * 1e-6
    w0 = validate.number("illumination.waist_mm", waist_mm, lo=0, lo_open=True)
    m2 = validate.number("illumination.m_squared", m_squared, lo=1.0)
    f = validate.number("effective_focal_mm", effective_focal_mm, lo=0, lo_open=True)
    return f * wl_mm * math.sqrt(m2 * m2 - 1.0) / (2.0 * math.pi * w0) * 1e3


def fibre_blur_radius_um(
    *, core_diameter_um: float, na: float, beam_radius_mm: float, effective_focal_mm: float
) -> float:
    """Radius of the uniform-disc blur of a collimated multimode fibre, retinal µm.

    ``f_eff (d/2) NA / R``: the fibre's beam parameter product ``(d/2) NA``
    over the beam radius ``R`` on the SLM is the half-angle of its light there.

    Parameters
    ----------
    core_diameter_um : float
        Core diameter, µm.
    na : float
        Numerical aperture, in (0, 1].
    beam_radius_mm : float
        Radius of the collimated beam on the SLM, mm.
    effective_focal_mm : float
        ``f_eye / M``, mm.

    References
    ----------
    .. [1] Mandel & Wolf (1995), §4.4 (van Cittert-Zernike theorem), from memory.
    """
    r_core_mm = (
        validate.number("illumination.fibre_core_um", core_diameter_um, lo=0, lo_open=True) * 0.5e-3
    )
    a = validate.number("illumination.fibre_na", na, lo=0, hi=1, lo_open=True)
    r = validate.number("illumination.waist_mm", beam_radius_mm, lo=0, lo_open=True)
    f = validate.number("effective_focal_mm", effective_focal_mm, lo=0, lo_open=True)
    return f * r_core_mm * a / r * 1e3

"""The eye's focusing errors as phases on the SLM: defocus, astigmatism, implant depth.

The SLM is imaged onto the eye's pupil with magnification ``M``, so an error of
``ΔD`` dioptres in the eye is a thin lens of that power in the pupil plane: on
the SLM pixel at ``(x, y)`` (mm) it is the phase ``-π ΔD M² (x² + y²) / λ``
(Goodman [1]_, eq. 5-10, with the power ``1/f = ΔD``). It acts on all the
light, the modulated and the unmodulated alike.

A ray through the pupil at height ``h`` is bent by ``ΔD h`` more or less than the
focused ray, so on the retina, a focal length ``f_eye`` behind the pupil, a beam
of diameter ``D`` at the pupil blurs into a patch of diameter about
``D |ΔD| f_eye`` (geometric optics, [2]_).

An implant whose photodiodes lie ``Δz`` behind the plane where the light is
focused sees the same blur as a defocus of ``Δz / (n' f_eye²)`` dioptres:
``f_eye`` is the eye's focal length in air (from its retinal scale) and ``n'``
the vitreous index, so the image-side focal length is ``n' f_eye`` and the
vergence change is ``n' Δz / (n' f_eye)²`` ([2]_, the vergence equation).

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), §5.1
   (thin lens as a quadratic phase, eq. 5-10).
.. [2] M. P. Keating, *Geometric, Physical, and Visual Optics*, 2nd ed.,
   Butterworth-Heinemann (2002), ch. 3-5 (vergence, blur circles; from memory).
.. [3] D. A. Atchison and G. Smith, *Optics of the Human Eye* (2000), ch. 5
   (refractive index of the vitreous, 1.336; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .. import validate
from ..errors import ConfigError

__all__ = [
    "VITREOUS_INDEX",
    "FocusError",
    "focus_error_phase_rad",
    "blur_diameter_um",
    "depth_to_defocus_d",
    "largest_defocus_d",
    "zero_order_focus_d",
]

#: Refractive index of the vitreous (Atchison & Smith 2000, from memory); the
#: image-side medium of the reduced eye.
VITREOUS_INDEX = 1.336


@dataclass(frozen=True)
class FocusError:
    """A focusing error of the eye (or of the implant's place behind the focus).

    Parameters
    ----------
    defocus_d : float
        Spherical error, dioptres (positive: converging power added, as the
        Fresnel lens term adds; the light focuses in front of the photodiodes,
        as in myopia). The sign decides whether the zero order, which the lens
        term leaves defocused, comes closer to a focus (:func:`zero_order_focus_d`).
    cylinder_d : float
        Astigmatism: extra power along one meridian, dioptres.
    cylinder_axis_deg : float
        Direction (from +x, towards +y on the SLM) of the meridian that carries
        ``cylinder_d``.
    depth_um : float
        The photodiodes' distance behind the plane of focus, µm (an implant's
        depth in the retina), added as :func:`depth_to_defocus_d`.
    """

    defocus_d: float = 0.0
    cylinder_d: float = 0.0
    cylinder_axis_deg: float = 0.0
    depth_um: float = 0.0

    def __post_init__(self) -> None:
        for name, lim in (("defocus_d", 30.0), ("cylinder_d", 30.0)):
            object.__setattr__(
                self,
                name,
                validate.number(f"tolerance.{name}", getattr(self, name), lo=-lim, hi=lim),
            )
        object.__setattr__(
            self,
            "cylinder_axis_deg",
            validate.number("tolerance.cylinder_axis_deg", self.cylinder_axis_deg, lo=-180, hi=180),
        )
        object.__setattr__(
            self,
            "depth_um",
            validate.number("tolerance.depth_um", self.depth_um, lo=-2000, hi=2000),
        )

    @property
    def is_zero(self) -> bool:
        return self.defocus_d == 0.0 and self.cylinder_d == 0.0 and self.depth_um == 0.0

    def total_defocus_d(self, eye_focal_mm: float) -> float:
        """Spherical error with the depth's share, dioptres."""
        return self.defocus_d + depth_to_defocus_d(self.depth_um, eye_focal_mm)


def depth_to_defocus_d(
    depth_um: float, eye_focal_mm: float, *, index: float = VITREOUS_INDEX
) -> float:
    """The defocus (dioptres) equivalent to photodiodes ``depth_um`` behind the focus.

    ``Δz / (n' f²)`` with ``f`` the eye's focal length in air: the image-side
    focal length is ``n' f`` and a shift ``Δz`` of the image plane changes the
    vergence by ``n' Δz / (n' f)²`` (Keating 2002, from memory).
    """
    f_m = validate.number("eye.focal_length_mm", eye_focal_mm, lo=0, lo_open=True) * 1e-3
    return float(depth_um) * 1e-6 / (index * f_m * f_m)


def blur_diameter_um(beam_diameter_mm: float, defocus_d: float, eye_focal_mm: float) -> float:
    """Geometric blur diameter on the retina, ``D |ΔD| f_eye`` (µm)."""
    return float(beam_diameter_mm) * abs(float(defocus_d)) * 1e-3 * float(eye_focal_mm) * 1e3


def largest_defocus_d(system) -> float:
    """The largest error (dioptres) whose phase the SLM pixels sample without aliasing.

    The phase step between neighbouring pixels at the SLM's edge,
    ``2π ΔD M² x p / λ``, must stay below π: ``|ΔD| <= λ / (M² W p)`` with
    ``W`` the SLM's larger width. Beyond it the blurred pattern would leave the
    diffraction order the prediction holds.
    """
    slm = system.slm
    m = system.relay.magnification
    w_mm = max(slm.width_mm, slm.height_mm)
    return system.illumination.wavelength_mm / (m * m * w_mm * slm.pitch_um * 1e-3) * 1e3


def zero_order_focus_d(system) -> float | None:
    """The eye's error (dioptres) at which the zero order comes to a focus on the retina.

    The Fresnel lens term ``-π r² / (λ f)`` on the SLM is a lens of power
    ``1 / f``; imaged to the pupil with magnification ``M`` it is ``1 / (f M²)``.
    The relay is refocused for the modulated light, which carries it, so the
    zero order, which does not, is defocused by that much: an eye whose error
    (:func:`focus_error_phase_rad`'s sign) is ``+1 / (f M²)`` focuses it.
    None without a lens term (the zero order is then focused in the planned eye).
    """
    f_mm = system.relay.fresnel_focal_mm
    if f_mm is None:
        return None
    m = system.relay.magnification
    return 1e3 / (f_mm * m * m)


def focus_error_phase_rad(system, error: FocusError) -> np.ndarray | None:
    """The phase (radians, float32, on the SLM pixels) of a focusing error, or None.

    ``-π M² / λ [ΔD (x² + y²) + C (x cos θ + y sin θ)²]`` with ``ΔD`` the total
    spherical error (defocus and depth), ``C`` the cylinder and ``θ`` its axis
    (Goodman 2005, eq. 5-10; a cylinder lens is the same phase along one
    meridian).

    Raises
    ------
    ConfigError
        If the error's steepest phase step between pixels reaches π
        (:func:`largest_defocus_d`).
    """
    if not isinstance(error, FocusError):
        raise ConfigError("tolerance", error, "a FocusError")
    if error.is_zero:
        return None
    d_sph = error.total_defocus_d(system.eye.focal_length_mm)
    d_cyl = error.cylinder_d
    steepest = abs(d_sph) + abs(d_cyl)
    limit = largest_defocus_d(system)
    if steepest >= limit:
        raise ConfigError(
            "tolerance.defocus_d",
            round(steepest, 3),
            f"|spherical| + |cylinder| < {limit:.2f} D for this SLM and relay",
            "a larger error's phase is aliased by the SLM pixels (λ / (M² W p))",
        )
    x, y = system.slm.pixel_coords_mm()
    m2 = system.relay.magnification**2
    k = -math.pi * m2 / system.illumination.wavelength_mm * 1e-3  # per dioptre, per mm²
    phase = (k * d_sph) * (x * x + y * y)
    if d_cyl != 0.0:
        t = math.radians(error.cylinder_axis_deg)
        u = x * math.cos(t) + y * math.sin(t)
        phase = phase + (k * d_cyl) * u * u
    return phase.astype(np.float32)

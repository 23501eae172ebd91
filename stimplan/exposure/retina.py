"""From the corneal limits to the predicted retina, and back.

The limits are corneal: radiant exposure or irradiance averaged over the 7 mm
limiting aperture. stimplan predicts the retina, so a limit is turned into a
retinal one through a reference eye (:class:`EyeModel`): an acceptance angle
``alpha`` is a retinal disc of diameter ``d = alpha * f`` (1 mrad x 1 mm =
1 um), and a corneal limit ``E`` is a retinal power ``tau * E * A_7mm``.

The ocular transmission ``tau`` cancels: the prediction multiplied the power
entering the eye by the planned eye's transmission, and the limit is multiplied
by the same ``tau`` (the planner passes it), so every ratio equals the ratio at
the cornea. A wrong ``tau`` then moves the per-pixel powers, never a verdict.

References
----------
.. [1] ICNIRP, Health Phys. 105, 271-295 (2013): limiting aperture 7 mm,
   alpha_min = 1.5 mrad.
.. [2] Directive 2006/25/EC, Annex II (limiting aperture 7 mm for 400-1400 nm).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from .. import validate
from ..errors import ConfigError
from .factors import ALPHA_MIN_MRAD

__all__ = [
    "LIMITING_APERTURE_MM",
    "LIMITING_APERTURE_AREA_M2",
    "HUMAN_FOCAL_LENGTH_MM",
    "EyeModel",
    "HUMAN_EYE",
    "check_eye",
    "retinal_image_diameter_um",
    "power_into_eye_mw",
    "retinal_irradiance_mw_per_mm2",
    "retinal_energy_factor_mj",
    "basis_text",
]

#: Limiting aperture for the retinal hazard region (published).
LIMITING_APERTURE_MM = 7.0
LIMITING_APERTURE_AREA_M2 = math.pi * (LIMITING_APERTURE_MM * 1e-3 / 2) ** 2
#: Focal length of the human reference eye of laser-safety texts, mm (common practice).
HUMAN_FOCAL_LENGTH_MM = 17.0


@dataclass(frozen=True)
class EyeModel:
    """The reference eye through which corneal limits are compared with the retina.

    Parameters
    ----------
    focal_length_mm : float
        An angle of 1 mrad is ``focal_length_mm`` um on the retina (17 mm).
    transmission : float
        Ocular transmission in (0, 1]. Pass the one the prediction used, so that
        it cancels (1 compares at the cornea when the prediction has none).
    name, source : str
        Shown in the ``basis`` text of results.
    """

    focal_length_mm: float = HUMAN_FOCAL_LENGTH_MM
    transmission: float = 1.0
    name: str = "human reference eye"
    source: str = "f = 17 mm (laser-safety convention)"

    def __post_init__(self) -> None:
        object.__setattr__(
            self,
            "focal_length_mm",
            validate.number("eye.focal_length_mm", self.focal_length_mm, lo=0, lo_open=True),
        )
        object.__setattr__(
            self,
            "transmission",
            validate.number("eye.transmission", self.transmission, lo=0, hi=1, lo_open=True),
        )

    def image_diameter_um(self, alpha_mrad: float) -> float:
        """Retinal diameter of an angle, ``alpha * f`` in micrometres."""
        return float(alpha_mrad) * self.focal_length_mm

    def describe(self) -> str:
        return f"the {self.name} (f = {self.focal_length_mm:g} mm, τ = {self.transmission:g})"


#: The human reference eye, f = 17 mm; transmission 1 (the limit at the cornea).
HUMAN_EYE = EyeModel()


def check_eye(eye: Any) -> EyeModel:
    """``eye`` if it is an :class:`EyeModel`, else a ConfigError."""
    if not isinstance(eye, EyeModel):
        raise ConfigError("eye", eye, "an EyeModel (e.g. stimplan.exposure.HUMAN_EYE)")
    return eye


def retinal_image_diameter_um(alpha_mrad: float, eye: EyeModel = HUMAN_EYE) -> float:
    """Retinal image diameter ``d = max(alpha, alpha_min) * f`` in micrometres.

    References
    ----------
    .. [1] ICNIRP (2013): alpha_min = 1.5 mrad; 1 mrad x 1 mm = 1 um.
    """
    a = validate.number("alpha_mrad", alpha_mrad, lo=0.0)
    return max(a, ALPHA_MIN_MRAD) * check_eye(eye).focal_length_mm


def power_into_eye_mw(corneal_irradiance_w_per_m2: float) -> float:
    """Power through the 7 mm limiting aperture, ``P = E * A_7mm``, in mW.

    References
    ----------
    .. [1] ICNIRP (2013): limits averaged over the 7 mm aperture.
    """
    e = validate.number("corneal_irradiance_w_per_m2", corneal_irradiance_w_per_m2, lo=0.0)
    return e * LIMITING_APERTURE_AREA_M2 * 1e3


def retinal_irradiance_mw_per_mm2(
    corneal_irradiance_w_per_m2: float, alpha_mrad: float, *, eye: EyeModel = HUMAN_EYE
) -> float:
    """Retinal irradiance ``tau * P / (pi d^2 / 4)`` of a uniform image of angle alpha.

    References
    ----------
    .. [1] ICNIRP (2013); cornea to retina: d = alpha f, E_r = tau P / (pi d^2 / 4).
    """
    eye = check_eye(eye)
    p_mw = power_into_eye_mw(corneal_irradiance_w_per_m2) * eye.transmission
    d_mm = retinal_image_diameter_um(alpha_mrad, eye) * 1e-3
    return p_mw / (math.pi * d_mm * d_mm / 4.0)


def retinal_energy_factor_mj(eye: EyeModel) -> float:
    """mJ of retinal energy per J/m^2 of corneal radiant exposure, ``tau * A_7mm * 1e3``."""
    return check_eye(eye).transmission * LIMITING_APERTURE_AREA_M2 * 1e3


def basis_text(eye: EyeModel, subject: str | None) -> str:
    """How the limits were compared with the predicted retina, in words."""
    text = (
        "Limits at the cornea (7 mm limiting aperture), compared with the predicted retina "
        f"through {eye.describe()}: an acceptance angle alpha is a disc of diameter "
        f"alpha x {eye.focal_length_mm:g} mm, and a corneal limit E is a retinal power "
        "τ x E x A(7 mm) with the τ the prediction used, so τ cancels."
    )
    if subject and subject.strip().lower() not in ("human", "human eye"):
        text += (
            f" The stimulus is planned for a {subject} eye; the standards are written for "
            f"the human eye, so the predicted {subject} retina is compared with the "
            "human-eye equivalent of the limits, not with limits scaled to the animal eye."
        )
    return text

"""Why a hologram puts more light on the ON pixels than a mask: the gain as three factors.

For the same laser power ``P`` and the same ON pixels, the ratio of the ON
photodiode power of a hologram to that of an amplitude mask is

``R = f_holo / f_mask``,

with ``f`` the fraction of the laser power that lands on the ON photodiodes.
A mask spreads ``P η τ`` evenly over its field ``A_field`` and keeps, on each
sample, the stimulus level ``t`` plus the leak ``(1 - t)/CR`` (see
:mod:`stimplan.baseline`), so ``f_mask = η τ (A_on / A_field) c`` where
``A_on`` is the ON photodiode area and ``c`` the mean level the mask shows
on the ON photodiodes (1 for a fully lit ON set; less where a pixel's
photodiode straddles an edge of the stimulus). Hence

``R = [f_holo / (η τ)] × [A_field / A_on] × [1 / c]``:

efficiency
    The hologram's share of the laser on the ON photodiodes over the mask's
    throughput ``η τ`` (panel transmission or DMD efficiency times the
    ocular transmission).
area
    The mask lights its whole field; only the ON photodiodes count.
coverage
    The ON photodiodes are not all fully lit by the mask's image.

The product equals ``R`` by construction (to rounding); each factor is a
physical ratio on its own.

References
----------
.. [1] W. den Boer, *Active Matrix Liquid Crystal Displays*, Elsevier (2005),
   §6.1 (an amplitude panel removes the light of its dark parts).
.. [2] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), ch. 9,
   computer-generated holograms (a phase hologram redistributes the light
   instead; the section number is from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import validate
from .errors import ConfigError

__all__ = ["GainFactors", "gain_factors"]


@dataclass(frozen=True)
class GainFactors:
    """The hologram-over-mask ON-pixel power ratio as a product of three factors.

    Attributes
    ----------
    efficiency : float
        ``f_holo / (η τ)``.
    area : float
        ``A_field / A_on``.
    coverage : float
        ``1 / c``, ``c`` the mask's mean level on the ON photodiodes.
    hologram_fraction, mask_fraction : float
        ``f_holo`` and ``f_mask``: shares of the laser power on the ON photodiodes.
    """

    efficiency: float
    area: float
    coverage: float
    hologram_fraction: float
    mask_fraction: float

    @property
    def ratio(self) -> float:
        """``f_holo / f_mask``: the ON-pixel power of the hologram over the mask's."""
        return self.hologram_fraction / self.mask_fraction

    @property
    def product(self) -> float:
        """``efficiency × area × coverage`` (equals :attr:`ratio` to rounding)."""
        return self.efficiency * self.area * self.coverage

    def as_dict(self) -> dict[str, float]:
        return {"efficiency": self.efficiency, "area": self.area, "coverage": self.coverage}

    def describe(self) -> str:
        """One line: the ratio and its three factors."""
        return (
            f"{self.ratio:.3g}x = efficiency {self.efficiency:.3g}x "
            f"(hologram {self.hologram_fraction:.1%} of the laser on ON photodiodes, "
            f"mask throughput {self.hologram_fraction / self.efficiency:.1%}) "
            f"× area {self.area:.3g}x × coverage {self.coverage:.3g}x"
        )


def gain_factors(
    *,
    hologram_on_power_uw: np.ndarray,
    mask_on_power_uw: np.ndarray,
    on_active_area_mm2: np.ndarray,
    laser_power_mw: float,
    mask_efficiency: float,
    eye_transmission: float,
    field_area_mm2: float,
) -> GainFactors:
    """The three factors of the hologram's ON-pixel gain over an amplitude mask.

    Parameters
    ----------
    hologram_on_power_uw, mask_on_power_uw : ndarray
        Photodiode power of each ON pixel, µW, at ``laser_power_mw``.
    on_active_area_mm2 : ndarray
        Photodiode area of each ON pixel, mm².
    laser_power_mw : float
        Laser power of both projectors, mW, > 0.
    mask_efficiency : float
        Panel transmission or DMD efficiency ``η``, in (0, 1].
    eye_transmission : float
        Ocular transmission ``τ``, in (0, 1].
    field_area_mm2 : float
        Retinal area of the mask's image, mm², > 0.

    Returns
    -------
    GainFactors

    Raises
    ------
    ConfigError
        If there is no ON pixel, or either projector puts no light on them.
    """
    p = validate.number("laser_power_mw", laser_power_mw, lo=0, lo_open=True)
    eta = validate.number("mask.efficiency", mask_efficiency, lo=0, hi=1, lo_open=True)
    tau = validate.number("eye.transmission", eye_transmission, lo=0, hi=1, lo_open=True)
    a_field = validate.number("field_area_mm2", field_area_mm2, lo=0, lo_open=True)
    h = np.asarray(hologram_on_power_uw, np.float64)
    m = np.asarray(mask_on_power_uw, np.float64)
    a_on = float(np.asarray(on_active_area_mm2, np.float64).sum())
    if h.size == 0 or a_on <= 0:
        raise ConfigError("on_pixels", h.size, "at least one ON pixel with a photodiode")
    f_holo = float(h.sum()) * 1e-3 / p
    f_mask = float(m.sum()) * 1e-3 / p
    if f_holo <= 0 or f_mask <= 0:
        raise ConfigError(
            "on_pixel_power_uw", (f_holo, f_mask), "> 0 for both the hologram and the mask"
        )
    level = f_mask / (eta * tau * a_on / a_field)
    return GainFactors(
        efficiency=f_holo / (eta * tau),
        area=a_field / a_on,
        coverage=1.0 / level,
        hologram_fraction=f_holo,
        mask_fraction=f_mask,
    )

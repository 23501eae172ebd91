"""Transmission of an eye's ocular media at a wavelength, from water absorption.

In the red and near infrared the ocular media absorb mainly through their
water. A light path of ``L`` through water of absorption coefficient
``alpha(λ)`` transmits ``exp(-alpha L)`` (Beer-Lambert) [1]_. The estimate
here is made to be an *upper bound* of the transmission, which is the safe
side for every retinal irradiance stimplan shows (a protocol's retinal cap
sees the most light the eye can pass; for the laser-safety limits the
transmission cancels, see :mod:`stimplan.exposure.retina`):

* the path is the eye's effective (posterior nodal) focal length, the one its
  retinal scale gives (``um_per_deg * 180/π``). The nodal point lies behind
  the cornea, so the light's path from the cornea to the retina is longer;
* the media are taken as pure water over that path; reflection at the cornea,
  scattering and every other absorber are left out, and they only lower the
  transmission;
* between the wavelengths of the table, the lower absorption of the two
  neighbouring table values is used (never an interpolated peak).

Measured whole-eye transmittance of the human eye reaches at most about
84 % (650-850 nm, Boettner & Wolter [2]_); the bound here is above that, as
a bound must be. A measured value for a given eye should replace it (pass
``transmission`` to the eye).

The table holds the absorption coefficients of pure water,
``alpha = 4 π k / λ``, at the 25 nm wavelengths of Hale & Querry's table of
the imaginary index ``k`` [1]_, 400-1000 nm, as tabulated (in 1/cm) in a
public data file that names that paper as its source. The table is not used
beyond 1000 nm: Hale & Querry give 1.0 µm and then 1.2 µm, and water's
absorption dips and peaks between them, so no bound can be read there.

References
----------
.. [1] G. M. Hale and M. R. Querry, "Optical constants of water in the
   200-nm to 200-µm wavelength region", *Appl. Opt.* 12, 555-563 (1973).
.. [2] E. A. Boettner and J. R. Wolter, "Transmission of the ocular media",
   *Invest. Ophthalmol.* 1, 776-783 (1962) (abstract: "the maximum total
   transmittance of the whole eye, which is about 84 per cent, is obtained in
   the region from 650 to 850 mµ").
"""

from __future__ import annotations

import math
from types import MappingProxyType

from .. import validate
from ..errors import ConfigError

__all__ = [
    "WATER_ABSORPTION_PER_CM",
    "WATER_TABLE_RANGE_NM",
    "water_absorption_per_mm",
    "water_path_transmission",
]

#: Absorption coefficient of pure water, 1/cm, at the 25 nm wavelengths (nm) of
#: Hale & Querry (1973), Table 1, converted from k as alpha = 4 π k / λ.
WATER_ABSORPTION_PER_CM = MappingProxyType(
    {
        400.0: 0.00058,
        425.0: 0.00038,
        450.0: 0.00028,
        475.0: 0.000247,
        500.0: 0.00025,
        525.0: 0.00032,
        550.0: 0.00045,
        575.0: 0.00079,
        600.0: 0.0023,
        625.0: 0.0028,
        650.0: 0.0032,
        675.0: 0.00415,
        700.0: 0.0060,
        725.0: 0.0159,
        750.0: 0.026,
        775.0: 0.024,
        800.0: 0.020,
        825.0: 0.028,
        850.0: 0.043,
        875.0: 0.056,
        900.0: 0.068,
        925.0: 0.144,
        950.0: 0.39,
        975.0: 0.45,
        1000.0: 0.36,
    }
)

#: The wavelengths the table covers, nm.
WATER_TABLE_RANGE_NM = (min(WATER_ABSORPTION_PER_CM), max(WATER_ABSORPTION_PER_CM))


def water_absorption_per_mm(wavelength_nm: float, *, field: str = "wavelength_nm") -> float:
    """Absorption coefficient of pure water at a wavelength, 1/mm (a lower bound).

    At a table wavelength, the table's value; between two, the lower of the
    two, so that a transmission computed from it is not understated.

    Parameters
    ----------
    wavelength_nm : float
        Vacuum wavelength, nm, in [400, 1000].
    field : str
        Field named in the error.

    Returns
    -------
    float
        ``alpha`` in 1/mm.

    Raises
    ------
    ConfigError
        Outside 400-1000 nm (the table's range).

    References
    ----------
    .. [1] Hale & Querry, *Appl. Opt.* 12, 555 (1973).
    """
    lo, hi = WATER_TABLE_RANGE_NM
    wl = validate.number(field, wavelength_nm, lo=lo, hi=hi)
    keys = sorted(WATER_ABSORPTION_PER_CM)
    below = max(k for k in keys if k <= wl)
    above = min(k for k in keys if k >= wl)
    per_cm = min(WATER_ABSORPTION_PER_CM[below], WATER_ABSORPTION_PER_CM[above])
    return per_cm / 10.0


def water_path_transmission(*, wavelength_nm: float, water_path_mm: float) -> float:
    """Transmission of a water path, ``exp(-alpha(λ) L)`` (Beer-Lambert), an upper bound.

    Parameters
    ----------
    wavelength_nm : float
        Vacuum wavelength, nm, in [400, 1000].
    water_path_mm : float
        Length of the water path, mm, > 0.

    Returns
    -------
    float
        In (0, 1].

    Raises
    ------
    ConfigError
        For a wavelength outside the table (give a measured transmission
        instead) or a path that is not a positive length.

    References
    ----------
    .. [1] Hale & Querry, *Appl. Opt.* 12, 555 (1973).
    """
    lo, hi = WATER_TABLE_RANGE_NM
    wl = validate.number("illumination.wavelength_nm", wavelength_nm, lo=0, lo_open=True)
    if not lo <= wl <= hi:
        raise ConfigError(
            "eye.transmission",
            None,
            f"a measured value for a wavelength outside [{lo:g}, {hi:g}] nm",
            f"the water-path estimate of the eye presets covers {lo:g}-{hi:g} nm; "
            f"the light is at {wl:g} nm",
        )
    alpha = water_absorption_per_mm(wl)
    path = validate.number("eye.water_path_mm", water_path_mm, lo=0, hi=100, lo_open=True)
    return math.exp(-alpha * path)

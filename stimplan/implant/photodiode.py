"""A pixel's photodiodes: from light on the active area to the pixel's current.

A photodiode of responsivity ``R`` (A/W) turns an optical power ``P`` into a
current ``R P``. A pixel whose active area is split into ``n`` photodiodes
connected in series (to reach a higher voltage) carries the current of one
of them: each gets ``P / n`` and the series passes the same current through
all, so

    ``I = R P / n``

(Kirchhoff's current law for a series chain of equally lit diodes; Loudin et
al. [2]_ study photovoltaic circuits "consisting of one or more diodes
connected in series").

The responsivity cannot exceed the silicon limit ``e λ / (h c)``, one
electron per photon (:func:`~stimplan.implant.geometry.silicon_responsivity_limit_a_per_w`,
about 0.71 A/W at 880 nm). Real diodes reach less: Huang et al. [1]_ report
"responsivity at 880 nm wavelength as high as 0.51 A/W, with 85% internal
quantum efficiency, independent of pixel size" for vertical-junction diodes
of 55 to 20 µm, and that with smaller flat bipolar pixels "the photodiode
responsivity significantly decrease[s]". An implant without a measured
responsivity is read at the silicon limit, and the readout says that its
current is an upper bound.

References
----------
.. [1] T. W. Huang et al., "Vertical-junction photodiodes for smaller pixels
   in retinal prostheses", *J. Neural Eng.* 18(3), 036015 (2021),
   doi:10.1088/1741-2552/abe6b8, abstract.
.. [2] J. D. Loudin et al., "Photodiode circuits for retinal prostheses",
   *IEEE Trans. Biomed. Circuits Syst.* 5(5), 468 (2011), abstract.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import validate
from ..errors import ConfigError
from .geometry import silicon_responsivity_limit_a_per_w

__all__ = [
    "HUANG_2021_RESPONSIVITY",
    "MAX_DIODES_IN_SERIES",
    "check_diodes_in_series",
    "pixel_photocurrent_ua",
    "pixel_responsivity",
]

#: The responsivity of Huang et al. (2021) [1]_, A/W at 880 nm, and its source text.
HUANG_2021_RESPONSIVITY = (
    0.51,
    "Huang et al., J. Neural Eng. 18(3), 036015 (2021), abstract: responsivity at 880 nm "
    "as high as 0.51 A/W (85 % internal quantum efficiency), vertical-junction photodiodes "
    "of 55-20 µm",
)

#: Most photodiodes one pixel may chain in series (a bound on input, not a design rule).
MAX_DIODES_IN_SERIES = 16


def check_diodes_in_series(value: Any, *, field: str = "implant.diodes_in_series") -> int:
    """Validate a number of photodiodes in series per pixel, an integer in [1, 16]."""
    return validate.integer(field, value, lo=1, hi=MAX_DIODES_IN_SERIES)


def pixel_responsivity(
    responsivity_a_per_w: float | None, wavelength_nm: float, *, field: str
) -> tuple[float, bool]:
    """The responsivity a readout uses and whether it is the silicon limit.

    Parameters
    ----------
    responsivity_a_per_w : float or None
        A measured responsivity, A/W; None for the silicon limit.
    wavelength_nm : float
        The illumination wavelength, nm.
    field : str
        Key path for the error message.

    Returns
    -------
    (float, bool)
        The responsivity, A/W, and True when it is the limit (an upper bound).

    Raises
    ------
    ConfigError
        When the responsivity exceeds the silicon limit at ``wavelength_nm``
        (more than one electron per photon).
    """
    limit = silicon_responsivity_limit_a_per_w(wavelength_nm)
    if responsivity_a_per_w is None:
        return limit, True
    r = validate.physical(field, responsivity_a_per_w, "responsivity_a_per_w")
    if r > limit * (1.0 + 1e-12):
        raise ConfigError(
            field,
            r,
            f"<= {limit:.4g} A/W",
            f"the silicon limit e·λ/(h·c) at {float(wavelength_nm):g} nm (one electron per photon)",
        )
    return r, False


def pixel_photocurrent_ua(
    power_uw: Any, *, responsivity_a_per_w: float, diodes_in_series: int = 1
) -> np.ndarray:
    """A pixel's photocurrent, ``responsivity × power / diodes_in_series``, µA.

    Parameters
    ----------
    power_uw : array_like
        Optical power on each pixel's whole active area, µW, >= 0.
    responsivity_a_per_w : float
        Responsivity of one photodiode, A/W, > 0.
    diodes_in_series : int
        Photodiodes in series per pixel, each covering ``1/n`` of the active
        area, in [1, 16].

    Returns
    -------
    ndarray, float64
        µA (µW × A/W = µA).

    References
    ----------
    .. [1] Loudin et al. (2011): see the module notes.
    """
    r = validate.number("responsivity_a_per_w", responsivity_a_per_w, lo=0.0, lo_open=True)
    n = check_diodes_in_series(diodes_in_series, field="diodes_in_series")
    p = np.asarray(power_uw, dtype=np.float64)
    return r * p / n

"""The implant's view: what each pixel receives against the stimulation threshold.

Each pixel's figure is the mean irradiance on its photodiode, the one the
readout reports (:attr:`PixelReadout.mean_irradiance_mw_per_mm2`: power on
the active area over that area). Against a threshold range ``(low, high)``
(:mod:`stimplan.implant.threshold`):

- an ON pixel under ``high`` *may not stimulate*;
- an OFF pixel over ``low`` *may stimulate*.

Both readings are conservative for their own question, so with a wide range
(the published ones span decades) both counts can be large at once; that is
what the sources allow one to say.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import validate
from ..errors import ConfigError
from .raster import PixelReadout
from .threshold import StimulationThreshold

__all__ = ["ImplantView", "implant_view"]


@dataclass(frozen=True, eq=False)
class ImplantView:
    """Per-pixel irradiance against a threshold range.

    Attributes
    ----------
    irradiance_mw_per_mm2 : ndarray, float64 (n,)
        Mean irradiance on each photodiode.
    on : ndarray of bool (n,)
        ON pixels.
    threshold : StimulationThreshold
    """

    irradiance_mw_per_mm2: np.ndarray
    on: np.ndarray
    threshold: StimulationThreshold

    @property
    def relative_to_low(self) -> np.ndarray:
        """Irradiance over the low end of the range (dimensionless)."""
        return self.irradiance_mw_per_mm2 / self.threshold.low_mw_per_mm2

    @property
    def relative_to_high(self) -> np.ndarray:
        """Irradiance over the high end of the range (dimensionless)."""
        return self.irradiance_mw_per_mm2 / self.threshold.high_mw_per_mm2

    @property
    def on_below(self) -> np.ndarray:
        """ON pixels under the high end: they may not stimulate (bool, (n,))."""
        return self.on & (self.irradiance_mw_per_mm2 < self.threshold.high_mw_per_mm2)

    @property
    def off_above(self) -> np.ndarray:
        """OFF pixels over the low end: they may stimulate (bool, (n,))."""
        return ~self.on & (self.irradiance_mw_per_mm2 > self.threshold.low_mw_per_mm2)

    def as_dict(self) -> dict[str, Any]:
        """The counts and the range, for ``check --json``."""
        t = self.threshold
        return {
            "threshold_mw_per_mm2": t.as_pair(),
            "source": t.source,
            "basis": "mean irradiance on each pixel's photodiode",
            "on_pixels": int(self.on.sum()),
            "off_pixels": int((~self.on).sum()),
            "on_below": int(self.on_below.sum()),
            "off_above": int(self.off_above.sum()),
        }


def implant_view(
    readout: PixelReadout,
    on: np.ndarray,
    *,
    threshold: StimulationThreshold,
    scale: float = 1.0,
) -> ImplantView:
    """The implant's view of one stimulus.

    Parameters
    ----------
    readout : PixelReadout
        The stimulus's per-pixel readout.
    on : ndarray of bool, shape (n_pixels,)
        ON pixels.
    threshold : StimulationThreshold
        The implant's range (:func:`stimplan.implant.threshold.stimulation_threshold`).
    scale : float
        Factor on the readout's irradiance, >= 0 (a readout at 1 mW of laser power
        is scaled by the laser power in mW).

    Returns
    -------
    ImplantView

    References
    ----------
    .. [1] Mathieson et al., *Nat. Photonics* 6, 391 (2012); Huang et al.,
       *J. Neural Eng.* 18(3) (2021): see :mod:`stimplan.implant.threshold`.
    """
    if not isinstance(readout, PixelReadout):
        raise ConfigError("readout", readout, "a PixelReadout")
    if not isinstance(threshold, StimulationThreshold):
        raise ConfigError("threshold", threshold, "a StimulationThreshold")
    k = validate.number("scale", scale, lo=0.0)
    on = np.asarray(on)
    if on.dtype != bool or on.shape != (readout.n_pixels,):
        raise ConfigError("on", f"{on.dtype} {on.shape}", f"bool of shape ({readout.n_pixels},)")
    irr = np.asarray(readout.mean_irradiance_mw_per_mm2, np.float64) * k
    return ImplantView(irradiance_mw_per_mm2=irr, on=on.copy(), threshold=threshold)

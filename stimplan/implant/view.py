"""The implant's view: what each pixel receives against the stimulation threshold.

Each pixel's figure is the mean irradiance on its photodiode, the one the
readout reports (:attr:`PixelReadout.mean_irradiance_mw_per_mm2`: power on
the active area over that area). Against a threshold range ``(low, high)``
(:mod:`stimplan.implant.threshold`):

- an ON pixel under ``high`` *may not stimulate*;
- an OFF pixel over ``low`` *may stimulate*.

Both readings are conservative for their own question, so with a wide range
(the published ones span decades) both counts can be large at once; that is
what the sources allow one to say. With a strength–duration curve the
threshold is the curve's value at the step's pulse width (``low == high``).

The view also carries each pixel's photocurrent (responsivity × power / diodes
in series, :mod:`stimplan.implant.photodiode`); at the silicon limit it is an
upper bound.
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
    photocurrent_ua : ndarray, float64 (n,)
        Each pixel's photocurrent, µA.
    responsivity_a_per_w : float
    diodes_in_series : int
    responsivity_is_limit : bool
        Whether the responsivity is the silicon limit (the current an upper bound).
    """

    irradiance_mw_per_mm2: np.ndarray
    on: np.ndarray
    threshold: StimulationThreshold
    photocurrent_ua: np.ndarray
    responsivity_a_per_w: float
    diodes_in_series: int = 1
    responsivity_is_limit: bool = False

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
        cur = self.photocurrent_ua
        return {
            "threshold_mw_per_mm2": t.as_pair(),
            "source": t.source,
            "threshold_model": t.model,
            "pulse_ms": t.pulse_ms,
            "basis": "mean irradiance on each pixel's photodiode",
            "on_pixels": int(self.on.sum()),
            "off_pixels": int((~self.on).sum()),
            "on_below": int(self.on_below.sum()),
            "off_above": int(self.off_above.sum()),
            "photocurrent_ua": {
                "on_min": float(cur[self.on].min()) if self.on.any() else None,
                "off_max": float(cur[~self.on].max()) if (~self.on).any() else None,
            },
            "responsivity_a_per_w": self.responsivity_a_per_w,
            "responsivity": "silicon limit (an upper bound)"
            if self.responsivity_is_limit
            else "the implant's",
            "diodes_in_series": self.diodes_in_series,
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
        The implant's range, or its curve's value at the step's pulse width
        (:func:`stimplan.implant.threshold.stimulation_threshold`).
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
    return ImplantView(
        irradiance_mw_per_mm2=irr,
        on=on.copy(),
        threshold=threshold,
        photocurrent_ua=np.asarray(readout.photocurrent_ua, np.float64) * k,
        responsivity_a_per_w=readout.responsivity_a_per_w,
        diodes_in_series=readout.diodes_in_series,
        responsivity_is_limit=readout.responsivity_is_limit,
    )

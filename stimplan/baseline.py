"""The amplitude-mask projector: the same stimulus shown by an LCD or a DMD.

A mask projector spreads the laser over its whole image and *removes* the
light of the dark parts. Its irradiance on a lit sample of relative value
``t`` is

``E = P η τ / A_field × (t + (1 - t)/CR)``

with the laser power ``P``, the panel's transmission (LCD) or ON-state
efficiency (DMD) ``η``, the ocular transmission ``τ``, the retinal area of
the projected image ``A_field`` and the contrast ratio ``CR``. A hologram
redistributes instead; for the same laser power its gain on the lit area is
about ``(η_holo / η_mask) × (A_field / A_lit)``.

References
----------
.. [1] W. den Boer, *Active Matrix Liquid Crystal Displays*, Elsevier (2005),
   §6.1 (total transmission of an AMLCD, 5–10 %).
.. [2] L. J. Hornbeck, "Digital Light Processing for high-brightness,
   high-resolution applications", *Proc. SPIE* 3013, 27 (1997) (DMD mirror
   reflectivity and fill factor; cited from memory).
.. [3] Opt. Express 16(3), 1669 (2008), doi:10.1364/OE.16.001669 (an LCoS
   display's fill factor "exceeding 90 %"); Spatialight, SLM M4-704x512
   product note (1996) (aperture ratio 76 %, aperture × reflectivity "over
   60 %").
.. [4] S. M. Popoff et al., "A practical guide to digital micro-mirror
   devices (DMDs) for wavefront shaping", arXiv:2311.17496 (2023) (array
   fill factor about 88-92 %).
"""

from __future__ import annotations

from dataclasses import dataclass

import numba as nb
import numpy as np

from . import validate
from .errors import ConfigError
from .grid import RetinalGrid

__all__ = [
    "AmplitudeMask",
    "MaskPreset",
    "MaskPrediction",
    "project_mask",
    "MASK_KINDS",
    "MASK_PRESETS",
    "MASK_PRESET_INFO",
]


@dataclass(frozen=True)
class AmplitudeMask:
    """An amplitude-mask projector.

    Parameters
    ----------
    kind : {"lcd", "lcos", "dmd"}
        Panel type (a label; the figures below set its behaviour): a colour
        LCD under a backlight, an amplitude LCoS (or monochrome LCD) lit by
        polarised laser light, or a DMD.
    efficiency : float
        Total transmission (LCD, LCoS) or fraction of the light sent to the ON
        direction (DMD), in (0, 1]; the panel's fill factor is part of it.
    contrast_ratio : float
        Full-on over full-off irradiance, >= 1.
    field_width_um, field_height_um : float, optional
        Retinal size of the projected image. Default: the whole grid the
        stimulus is given on.
    """

    kind: str = "lcd"
    efficiency: float = 0.07
    contrast_ratio: float = 1000.0
    field_width_um: float | None = None
    field_height_um: float | None = None

    def __post_init__(self) -> None:
        validate.choice("mask.kind", self.kind, MASK_KINDS)
        object.__setattr__(
            self,
            "efficiency",
            validate.number("mask.efficiency", self.efficiency, lo=0, hi=1, lo_open=True),
        )
        object.__setattr__(
            self,
            "contrast_ratio",
            validate.physical("mask.contrast_ratio", self.contrast_ratio, "contrast_ratio"),
        )
        for name in ("field_width_um", "field_height_um"):
            val = getattr(self, name)
            if val is not None:
                object.__setattr__(
                    self, name, validate.physical(f"mask.{name}", val, "retinal_length_um")
                )


#: The panel types a mask may be.
MASK_KINDS = ("lcd", "lcos", "dmd")


@dataclass(frozen=True)
class MaskPreset:
    """A typical panel: its figures and where each comes from.

    Attributes
    ----------
    mask : AmplitudeMask
    label : str
    fill_factor : float
        Open (or mirror) area share of a panel pixel; already part of the
        mask's ``efficiency``.
    sources : dict of str to str
        For ``efficiency``, ``fill_factor`` and ``contrast_ratio``: the source,
        or "from memory" where no text was at hand.
    """

    mask: AmplitudeMask
    label: str
    fill_factor: float
    sources: dict

    def describe(self) -> str:
        m = self.mask
        return (
            f"{self.label}: efficiency {m.efficiency:.2g} ({self.sources['efficiency']}), "
            f"fill factor {self.fill_factor:.2g} ({self.sources['fill_factor']}), "
            f"contrast {m.contrast_ratio:.0f}:1 ({self.sources['contrast_ratio']})"
        )


#: Typical panels, with their sources. All figures are for visible light; at 880 nm a
#: colour filter passes more and a polariser blocks less (so the colour LCD is if
#: anything a pessimistic mask), and a DMD's window and blaze change its share.
MASK_PRESET_INFO: dict[str, MaskPreset] = {
    "lcd": MaskPreset(
        AmplitudeMask("lcd", 0.07, 1000.0),
        "colour LCD under a backlight",
        0.55,
        {
            "efficiency": "den Boer 2005, §6.1.1: total transmittance 5-10 %",
            "fill_factor": "den Boer 2005, §6.1.1: aperture ratio 40-70 %",
            "contrast_ratio": "from memory",
        },
    ),
    "lcos": MaskPreset(
        AmplitudeMask("lcos", 0.6, 1000.0),
        "amplitude LCoS (or monochrome LCD) lit by polarised laser light",
        0.9,
        {
            "efficiency": "Spatialight 1996: aperture x reflectivity over 60 %",
            "fill_factor": "Opt. Express 16, 1669 (2008): fill factor exceeding 90 %",
            "contrast_ratio": "from memory",
        },
    ),
    "dmd": MaskPreset(
        AmplitudeMask("dmd", 0.65, 2000.0),
        "DMD",
        0.9,
        {
            "efficiency": "from memory: fill x mirror reflectivity x window x diffraction",
            "fill_factor": "Popoff et al. 2023: array fill factor about 88-92 %",
            "contrast_ratio": "from memory",
        },
    ),
}

#: The presets' masks, by kind.
MASK_PRESETS: dict[str, AmplitudeMask] = {k: p.mask for k, p in MASK_PRESET_INFO.items()}


@dataclass(frozen=True)
class MaskPrediction:
    """Retinal irradiance of a mask projector.

    Attributes
    ----------
    irradiance_mw_per_mm2 : ndarray, float32
    grid : RetinalGrid
    power_mw : float
        Laser power on the panel.
    field_area_mm2 : float
        Retinal area of the projected image.
    """

    irradiance_mw_per_mm2: np.ndarray
    grid: RetinalGrid
    power_mw: float
    field_area_mm2: float

    @property
    def sample_power_mw(self) -> np.ndarray:
        return self.irradiance_mw_per_mm2 * np.float32(self.grid.sample_area_mm2)

    def scaled_to(self, power_mw: float) -> MaskPrediction:
        p = validate.number("power_mw", power_mw, lo=0, lo_open=True)
        k = np.float32(p / self.power_mw)
        return MaskPrediction(self.irradiance_mw_per_mm2 * k, self.grid, p, self.field_area_mm2)


@nb.njit(cache=True, nogil=True)
def _shown_on_field(t, leak, row, col, out):  # pragma: no cover - compiled
    """``out = (t (1 - leak) + leak) * row[i] * col[j]`` in float32, in one pass."""
    keep = np.float32(1.0) - leak
    for i in range(t.shape[0]):
        r = row[i]
        for j in range(t.shape[1]):
            out[i, j] = ((t[i, j] * keep + leak) * r) * col[j]


def _cell_fraction_inside(centres_um, pitch_um: float, centre_um: float, width_um: float):
    """Fraction (float32) of each sample's cell ``[c - p/2, c + p/2]`` inside the interval
    of ``width_um`` about ``centre_um``."""
    c = np.asarray(centres_um, dtype=np.float64)
    lo = np.maximum(c - pitch_um / 2, centre_um - width_um / 2)
    hi = np.minimum(c + pitch_um / 2, centre_um + width_um / 2)
    return (np.clip(hi - lo, 0.0, pitch_um) / pitch_um).astype(np.float32)


def project_mask(
    intensity: np.ndarray,
    grid: RetinalGrid,
    mask: AmplitudeMask,
    power_mw: float,
    *,
    eye_transmission: float = 1.0,
    illumination: np.ndarray | None = None,
    field_center_um: tuple[float, float] = (0.0, 0.0),
) -> MaskPrediction:
    """Retinal irradiance of a stimulus shown by an amplitude mask.

    Parameters
    ----------
    intensity : ndarray
        Relative stimulus in [0, 1] on ``grid`` (the panel's image on the
        retina).
    grid : RetinalGrid
    mask : AmplitudeMask
    power_mw : float
        Laser power on the panel, mW.
    eye_transmission : float
        Ocular transmission, in (0, 1].
    illumination : ndarray, optional
        Relative illumination of the panel on ``grid`` (any scale; default
        uniform). It is normalised to carry the laser power over the field.
    field_center_um : tuple of float
        Retinal ``(x, y)`` of the centre of the projected image, µm.

    Returns
    -------
    MaskPrediction

    References
    ----------
    .. [1] den Boer (2005), §6.1.
    """
    t = validate.finite_array("stimulus", intensity, shape=grid.shape, lo=0.0, hi=1.0)
    p = validate.number("power_mw", power_mw, lo=0, lo_open=True)
    tau = validate.number("eye.transmission", eye_transmission, lo=0, hi=1, lo_open=True)
    w = mask.field_width_um or grid.width_um
    h = mask.field_height_um or grid.height_um
    if w > grid.width_um * (1 + 1e-9) or h > grid.height_um * (1 + 1e-9):  # larger than the grid
        raise ConfigError(
            "mask.field_width_um",
            (w, h),
            f"at most the grid ({grid.width_um:.0f} × {grid.height_um:.0f} µm)",
        )
    cx = validate.number("mask.field_center_um[0]", field_center_um[0])
    cy = validate.number("mask.field_center_um[1]", field_center_um[1])
    # the field is a rectangle: one row factor and one column factor, each the fraction
    # of a sample's cell inside the field (so the lit area is w x h exactly, also when
    # an edge falls on a sample centre); without a field size the field is the grid
    if mask.field_width_um is None:
        in_x = np.ones(grid.cols, dtype=np.float32)
    else:
        in_x = _cell_fraction_inside(grid.x_um, grid.pitch_x_um, cx, w)
    if mask.field_height_um is None:
        in_y = np.ones(grid.rows, dtype=np.float32)
    else:
        in_y = _cell_fraction_inside(grid.y_um, grid.pitch_y_um, cy, h)
    # the field's own area in samples: light of a field that runs off the grid is lost
    n_inside = (w / grid.pitch_x_um) * (h / grid.pitch_y_um)
    if not (float(in_x.sum()) > 0 and float(in_y.sum()) > 0):
        raise ConfigError("mask.field_center_um", (cx, cy), "a field that overlaps the grid")
    leak = np.float32(1.0 / mask.contrast_ratio)
    scale = p * mask.efficiency * tau / grid.sample_area_mm2
    if illumination is None:
        irr = np.empty(t.shape, dtype=np.float32)
        col = in_x * np.float32(scale / n_inside)
        _shown_on_field(np.ascontiguousarray(t, dtype=np.float32), leak, in_y, col, irr)
    else:
        irr = t * (np.float32(1.0) - leak)  # shown = t + (1 - t) leak, a new float32 array
        irr += leak
        illum = validate.finite_array("illumination", illumination, shape=grid.shape, lo=0.0)
        illum = illum * in_y[:, np.newaxis] * in_x[np.newaxis, :]
        total = float(illum.sum(dtype=np.float64))
        if total <= 0:
            raise ConfigError("illumination", "zero on the field", "a non-zero illumination")
        irr *= illum.astype(np.float32, copy=False)
        irr *= np.float32(scale / total)
    area_mm2 = n_inside * grid.sample_area_mm2
    return MaskPrediction(irr, grid, p, area_mm2)

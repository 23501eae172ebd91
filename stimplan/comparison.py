"""One stimulus on one implant, three ways, at the same laser power.

(a) an image-domain hologram (the stimulus itself is the target), (b) an
implant-aware hologram (light only on the photodiodes of ON pixels, with
pixel-domain weighting) and (c) an amplitude mask (LCD or DMD) that covers
the implant. The figures are the power per ON pixel, the ON/OFF contrast and
the coefficient of variation across ON pixels.

References
----------
.. [1] M. Pasienski and B. DeMarco, *Opt. Express* 16, 2176 (2008).
.. [2] R. Di Leonardo, F. Ianni and G. Ruocco, *Opt. Express* 15, 1913 (2007).
.. [3] W. den Boer, *Active Matrix Liquid Crystal Displays* (2005), §6.1.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from .baseline import MASK_PRESETS, AmplitudeMask, MaskPrediction, project_mask
from .errors import ConfigError
from .holography import Hologram, IftaSettings, RetinalPrediction, design_hologram
from .implant.target import PixelStates, implant_target, pixel_states
from .metrics import coefficient_of_variation
from .optics.target import Target

__all__ = ["ProjectorFigures", "ImplantComparison", "pixel_figures", "compare_on_implant"]


@dataclass(frozen=True)
class ProjectorFigures:
    """Per-pixel figures of one way of projecting a stimulus.

    Attributes
    ----------
    label : str
    on_power_uw : float
        Mean photodiode power of the ON pixels, µW.
    min_on_power_uw : float
        Least photodiode power among the ON pixels, µW.
    off_power_uw : float
        Mean photodiode power of the OFF pixels, µW (0 if none).
    on_off_contrast : float
        ``on_power_uw / off_power_uw`` (inf when the OFF pixels get nothing).
    on_cv : float
        Coefficient of variation of the ON pixels' power.
    on_irradiance_mw_per_mm2 : float
        Mean irradiance on the ON photodiodes.
    power_uw : ndarray
        Power of every pixel, µW.
    """

    label: str
    on_power_uw: float
    min_on_power_uw: float
    off_power_uw: float
    on_off_contrast: float
    on_cv: float
    on_irradiance_mw_per_mm2: float
    power_uw: np.ndarray

    def as_dict(self) -> dict[str, float | str]:
        d = {k: val for k, val in self.__dict__.items() if k != "power_uw"}
        return d


def pixel_figures(label: str, readout, on: np.ndarray) -> ProjectorFigures:
    """Figures of a :class:`~stimplan.implant.PixelReadout` for the ON pixels ``on``."""
    p = np.asarray(readout.power_uw, dtype=np.float64)
    on = np.asarray(on, bool)
    if not on.any():
        raise ConfigError("stimulus", "no implant pixel on", "at least one ON pixel")
    off = p[~on]
    on_mean = float(p[on].mean())
    off_mean = float(off.mean()) if off.size else 0.0
    area = np.asarray(readout.active_area_mm2)[on]
    return ProjectorFigures(
        label=label,
        on_power_uw=on_mean,
        min_on_power_uw=float(p[on].min()),
        off_power_uw=off_mean,
        on_off_contrast=(on_mean / off_mean) if off_mean > 0 else float("inf"),
        on_cv=coefficient_of_variation(p[on]),
        on_irradiance_mw_per_mm2=float(p[on].sum() * 1e-3 / area.sum()),
        power_uw=p,
    )


@dataclass(frozen=True)
class ImplantComparison:
    """Result of :func:`compare_on_implant`."""

    states: PixelStates
    image: ProjectorFigures
    aware: ProjectorFigures
    mask: ProjectorFigures
    image_hologram: Hologram
    aware_hologram: Hologram
    image_prediction: RetinalPrediction
    aware_prediction: RetinalPrediction
    mask_prediction: MaskPrediction

    @property
    def aware_over_image(self) -> float:
        """Mean ON-pixel power, implant-aware hologram over image-domain hologram."""
        return self.aware.on_power_uw / self.image.on_power_uw

    @property
    def image_over_mask(self) -> float:
        """Mean ON-pixel power, image-domain hologram over the amplitude mask."""
        return self.image.on_power_uw / self.mask.on_power_uw

    @property
    def aware_over_mask(self) -> float:
        return self.aware.on_power_uw / self.mask.on_power_uw


def mask_for_implant(mask: AmplitudeMask, implant, *, margin: float = 1.1) -> AmplitudeMask:
    """The mask with its image sized to the implant's footprint (× ``margin``) if unset."""
    if mask.field_width_um is not None:
        return mask
    e = implant.footprint_extent_um
    return replace(
        mask, field_width_um=(e[1] - e[0]) * margin, field_height_um=(e[3] - e[2]) * margin
    )


def project_mask_on_implant(
    intensity: np.ndarray, grid, mask: AmplitudeMask, implant, power_mw: float, eye_transmission
) -> tuple[MaskPrediction, AmplitudeMask]:
    """The mask projector with its image sized to and centred on the implant (if any).

    Returns the prediction and the mask as used (its field size filled in).

    References
    ----------
    .. [1] W. den Boer, *Active Matrix Liquid Crystal Displays* (2005), §6.1.
    """
    center = (0.0, 0.0)
    if implant is not None:
        mask = mask_for_implant(mask, implant)
        center = (implant.center_x_um, implant.center_y_um)
    mp = project_mask(
        intensity, grid, mask, power_mw, eye_transmission=eye_transmission, field_center_um=center
    )
    return mp, mask


def compare_on_implant(
    stimulus,
    implant,
    system,
    *,
    image_settings: IftaSettings | None = None,
    aware_settings: IftaSettings | None = None,
    mask: AmplitudeMask | None = None,
    threshold: float = 0.5,
    oversample: int = 2,
    progress: Callable[[int], None] | None = None,
) -> ImplantComparison:
    """Compare image-domain and implant-aware holograms with an amplitude mask.

    Parameters
    ----------
    stimulus : Stimulus or ndarray
        Anything with ``render(grid)``, or an intensity array on the design grid.
    implant : Implant
    system : OpticalSystem
        Its laser power is used for all three.
    image_settings, aware_settings : IftaSettings, optional
        Defaults: MRAF, 60 iterations; the aware one adds pixel-domain weighting.
    mask : AmplitudeMask, optional
        Default: the LCD preset, its image sized to the implant (× 1.1).
    threshold : float
        Cell-mean stimulus at which a pixel is ON.
    oversample : int
        Prediction oversampling.
    progress : callable, optional
        Called with the iteration count of each hologram.

    Returns
    -------
    ImplantComparison

    References
    ----------
    .. [1] Pasienski & DeMarco (2008); Di Leonardo et al. (2007); W. den Boer, *Active Matrix Liquid
       Crystal Displays* (2005), §6.1.
    """
    grid = system.design_grid()
    implant.check_fits(grid)
    design = stimulus.render(grid) if hasattr(stimulus, "render") else np.asarray(stimulus)
    states = pixel_states(design, grid, implant, threshold=threshold)
    st_img = image_settings or IftaSettings(method="mraf", iterations=60, initial="lens")
    st_aw = aware_settings or IftaSettings(
        method="mraf", iterations=60, initial="lens", group_weighting=True
    )
    img_target = Target.from_intensity(design, grid, name="image-domain")
    aw_target = implant_target(design, grid, implant, threshold=threshold)
    h_img = design_hologram(img_target, system, st_img, progress=progress)
    h_aw = design_hologram(aw_target, system, st_aw, progress=progress)
    p_img = h_img.predict(system, oversample=oversample)
    p_aw = h_aw.predict(system, oversample=oversample)
    pg = p_img.grid
    wl = system.illumination.wavelength_nm
    r_img = implant.readout(p_img.irradiance_mw_per_mm2, pg, wavelength_nm=wl)
    r_aw = implant.readout(p_aw.irradiance_mw_per_mm2, pg, wavelength_nm=wl)
    fine = stimulus.render(pg) if hasattr(stimulus, "render") else img_target.intensity_on(pg)
    mp, m = project_mask_on_implant(
        fine,
        pg,
        mask or MASK_PRESETS["lcd"],
        implant,
        system.illumination.power_mw,
        system.eye.transmission,
    )
    r_mask = implant.readout(mp.irradiance_mw_per_mm2, pg, wavelength_nm=wl)
    return ImplantComparison(
        states=states,
        image=pixel_figures("image-domain hologram", r_img, states.on),
        aware=pixel_figures("implant-aware hologram", r_aw, states.on),
        mask=pixel_figures(f"{m.kind.upper()} mask", r_mask, states.on),
        image_hologram=h_img,
        aware_hologram=h_aw,
        image_prediction=p_img,
        aware_prediction=p_aw,
        mask_prediction=mp,
    )

"""Where the light of one stimulus goes, from the laser to the ON photodiodes.

The budget is the power account of the prediction
(:class:`~stimplan.holography.propagation.PowerAccount`) preceded by the
SLM's aperture and followed by the implant's regions on the retina. Its
entries are disjoint and sum to the laser power:

laser = outside the SLM aperture + SLM pixel gaps + not reflected by the SLM
+ lost in the relay + clipped at the pupil + higher diffraction orders +
absorbed by the ocular media + outside the array + between photodiodes
(trenches and cell borders) + OFF photodiodes + ON photodiodes.

Three more figures are parts of these, not entries:

zero order
    The unmodulated light (the SLM's ``zero_order_fraction`` of the modulated
    polarisation, and all of the other polarisation), which lands on the
    retina at the optical axis; it is inside the retinal entries.
cross-polarised
    The part of the zero order that is the polarisation the SLM does not
    modulate.
quantisation noise
    The share of the modulated light that ``N`` phase levels scatter away
    from the designed pattern, ``1 - sinc²(1/N)`` [3]_; it is spread over the
    retinal field and so also inside the retinal entries.

The *deliverable* light is what an ideal phase pattern could put on the
retina through this SLM and eye: the light through the pixel apertures, the
SLM's reflection, the relay and the pupil, without the zero order, times the
central diffraction order's share at its peak, after the ocular media. With
a square pixel aperture of linear fraction ``a = sqrt(fill_factor)`` the
orders' envelope is
``sinc²(a k)`` per axis [1]_, and ``Σ_k sinc²(a k) = 1/a`` for ``a <= 1``
(Poisson summation: the transform of ``sinc²`` is a triangle of half-width
``a``), so the central order holds at most ``a² = fill_factor`` of the light
through the apertures.

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), §4.2
   (Fraunhofer diffraction by a rectangular aperture; the pixel grid's
   orders under a ``sinc²`` envelope).
.. [2] A. E. Siegman, *Lasers*, University Science Books (1986), §17.1 (a
   Gaussian beam of 1/e² radius ``w`` passes ``erf(sqrt(2) x / w)`` of its
   power per axis through a slit of half-width ``x``; section number from
   memory).
.. [3] G. J. Swanson, "Binary optics technology: the theory and design of
   multi-level diffractive optical elements", MIT Lincoln Laboratory
   Technical Report 854 (1989) (first-order efficiency ``sinc²(1/N)`` of an
   ``N``-level phase profile; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import erf

from . import validate

__all__ = [
    "LightBudget",
    "gaussian_fraction_on_aperture",
    "quantisation_efficiency",
    "light_budget",
    "footprint_mw",
    "slm_fraction",
    "BUDGET_LABELS",
]

#: The entries of a budget in order, with their labels (they sum to the laser power).
BUDGET_LABELS = {
    "outside_slm_mw": "outside the SLM aperture",
    "pixel_gaps_mw": "SLM pixel gaps",
    "slm_absorbed_mw": "not reflected by the SLM",
    "relay_lost_mw": "lost in the relay",
    "pupil_clipped_mw": "clipped at the pupil",
    "higher_orders_mw": "higher diffraction orders",
    "ocular_absorbed_mw": "absorbed by the ocular media",
    "outside_array_mw": "retina outside the array",
    "between_photodiodes_mw": "between photodiodes (trenches, cell borders)",
    "off_photodiodes_mw": "OFF photodiodes",
    "on_photodiodes_mw": "ON photodiodes",
}


def gaussian_fraction_on_aperture(*, waist_mm: float, width_mm: float, height_mm: float) -> float:
    """Share of a centred Gaussian beam's power on a ``width × height`` rectangle.

    ``erf(sqrt(2) (W/2) / w) · erf(sqrt(2) (H/2) / w)`` for the 1/e² intensity
    radius ``w`` [2]_.
    """
    w = validate.number("illumination.waist_mm", waist_mm, lo=0, lo_open=True)
    wx = validate.number("slm.width_mm", width_mm, lo=0, lo_open=True)
    hy = validate.number("slm.height_mm", height_mm, lo=0, lo_open=True)
    s = math.sqrt(2.0) / w
    return float(erf(s * wx / 2.0) * erf(s * hy / 2.0))


def slm_fraction(system) -> float:
    """Share of the laser's power on the SLM: the Gaussian's on its aperture, or 1.

    A flat or measured (``"file"``) beam is given on the SLM's pixels, so all
    of it is on the SLM.
    """
    ill, slm = system.illumination, system.slm
    if ill.profile != "gaussian":
        return 1.0
    return gaussian_fraction_on_aperture(
        waist_mm=ill.waist_mm,
        width_mm=slm.pixels_x * slm.pitch_um * 1e-3,
        height_mm=slm.pixels_y * slm.pitch_um * 1e-3,
    )


def quantisation_efficiency(levels: int) -> float:
    """``sinc²(1/N)``: the share of the light an ``N``-level phase profile keeps [3]_."""
    n = validate.integer("slm.phase_levels", levels, lo=2)
    x = math.pi / n
    return (math.sin(x) / x) ** 2


@dataclass(frozen=True)
class LightBudget:
    """Where the laser power of one stimulus goes, mW (see the module notes).

    The entries named in :data:`BUDGET_LABELS` sum to ``laser_mw``.
    ``zero_order_mw`` (with its part ``cross_polarised_mw``) and
    ``quantisation_noise_mw`` are parts of the retinal entries;
    ``deliverable_mw`` is the most an ideal pattern could put on the retina.
    ``crosstalk_mw`` is the signal light that the SLM's fringing fields move
    elsewhere (the prediction's :attr:`PowerAccount.crosstalk_mw`; 0 for an
    ideal SLM): it is inside the other entries, not one of them.
    """

    laser_mw: float
    outside_slm_mw: float
    pixel_gaps_mw: float
    slm_absorbed_mw: float
    relay_lost_mw: float
    pupil_clipped_mw: float
    higher_orders_mw: float
    ocular_absorbed_mw: float
    outside_array_mw: float
    between_photodiodes_mw: float
    off_photodiodes_mw: float
    on_photodiodes_mw: float
    zero_order_mw: float
    quantisation_noise_mw: float
    deliverable_mw: float
    cross_polarised_mw: float = 0.0
    crosstalk_mw: float = 0.0

    def entries(self) -> dict[str, float]:
        """The disjoint entries, laser to photodiodes."""
        return {k: getattr(self, k) for k in BUDGET_LABELS}

    def total_mw(self) -> float:
        """Sum of the entries; equals ``laser_mw`` (to rounding)."""
        return float(sum(self.entries().values()))

    @property
    def on_share_of_laser(self) -> float:
        return self.on_photodiodes_mw / self.laser_mw

    @property
    def on_share_of_deliverable(self) -> float:
        return self.on_photodiodes_mw / self.deliverable_mw if self.deliverable_mw > 0 else 0.0

    def scaled(self, factor: float) -> LightBudget:
        """The same budget at ``factor`` times the laser power."""
        return LightBudget(**{k: v * factor for k, v in self.__dict__.items()})

    def as_dict(self) -> dict[str, float]:
        out = dict(self.__dict__)
        out["on_share_of_laser"] = self.on_share_of_laser
        out["on_share_of_deliverable"] = self.on_share_of_deliverable
        return out


def light_budget(
    account,
    *,
    slm_fraction: float,
    fill_factor: float,
    zero_order_fraction: float,
    phase_levels: int,
    eye_transmission: float,
    retina_mw: float,
    footprint_mw: float,
    on_photodiodes_mw: float,
    off_photodiodes_mw: float,
) -> LightBudget:
    """The light budget of one stimulus.

    Parameters
    ----------
    account : PowerAccount
        Of the prediction; its ``input_mw`` is the power on the SLM.
    slm_fraction : float
        Share of the laser's power that falls on the SLM, in (0, 1]
        (:func:`gaussian_fraction_on_aperture`, or 1 for a measured beam).
    fill_factor : float
        Of the SLM.
    zero_order_fraction : float
        The share of the light through the pixel apertures that is not
        modulated: the system's ``unmodulated_fraction`` (the SLM's zero order
        and the polarisation it does not modulate).
    phase_levels : int
        Phase levels of the SLM (for the quantisation noise).
    eye_transmission : float
        Ocular transmission.
    retina_mw : float
        Power of the retinal map (zero order and modulated light).
    footprint_mw : float
        Part of ``retina_mw`` on the array (pixel cells and trenches).
    on_photodiodes_mw, off_photodiodes_mw : float
        Parts of ``footprint_mw`` on the photodiodes of the ON and OFF pixels.

    Returns
    -------
    LightBudget
    """
    f_in = validate.number("slm_fraction", slm_fraction, lo=0, hi=1, lo_open=True)
    ff = validate.number("slm.fill_factor", fill_factor, lo=0, hi=1, lo_open=True)
    z = validate.number("slm.zero_order_fraction", zero_order_fraction, lo=0, hi=1)
    tau = validate.number("eye.transmission", eye_transmission, lo=0, hi=1, lo_open=True)
    on, off = float(on_photodiodes_mw), float(off_photodiodes_mw)
    foot, retina = float(footprint_mw), float(retina_mw)
    laser = account.input_mw / f_in
    through_pupil = (
        account.input_mw * ff
        - account.slm_absorbed_mw
        - account.relay_lost_mw
        - account.pupil_clipped_mw
    )
    modulated_on_retina = account.field_mw
    return LightBudget(
        laser_mw=laser,
        outside_slm_mw=laser - account.input_mw,
        pixel_gaps_mw=account.pixel_gaps_mw,
        slm_absorbed_mw=account.slm_absorbed_mw,
        relay_lost_mw=account.relay_lost_mw,
        pupil_clipped_mw=account.pupil_clipped_mw,
        higher_orders_mw=account.higher_orders_mw,
        ocular_absorbed_mw=account.ocular_absorbed_mw,
        outside_array_mw=retina - foot,
        between_photodiodes_mw=foot - on - off,
        off_photodiodes_mw=off,
        on_photodiodes_mw=on,
        zero_order_mw=account.zero_order_mw,
        quantisation_noise_mw=modulated_on_retina * (1.0 - quantisation_efficiency(phase_levels)),
        deliverable_mw=through_pupil * (1.0 - z) * ff * tau,
        cross_polarised_mw=account.cross_polarised_mw,
        crosstalk_mw=account.crosstalk_mw or 0.0,
    )


def footprint_mw(irradiance_mw_per_mm2: np.ndarray, sample_area_mm2: float, cells) -> float:
    """The power of a retinal map on an implant's cells (pixel cells and trenches), mW.

    ``cells`` is the implant's :class:`~stimplan.implant.raster.ImplantRaster`
    of region ``"cell"`` on the map's grid.
    """
    power = np.asarray(irradiance_mw_per_mm2, np.float64).reshape(-1) * sample_area_mm2
    return float(np.asarray(cells.matrix @ power).sum())

"""How a hologram's per-pixel powers survive an imperfect eye and placement.

The optics of a plan are exact for a perfectly focused eye and an implant
exactly where it was planned. :func:`analyse_tolerance` predicts the retina
again for the ends of the ranges a researcher expects (defocus, astigmatism,
the photodiodes' depth behind the focus, lateral shift and magnification error
of the image on the implant) and reads every implant pixel, so the worst ON
pixel and the worst OFF pixel over those cases are known before an
experiment.

:func:`robust_implant_target` is the matching design option: the light of ON
pixels is aimed at the photodiodes' cores, shrunk by the geometric blur of the
largest expected defocus, so that blurred light still lands on the
photodiode.

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), §5.1
   (defocus as a quadratic phase).
.. [2] M. P. Keating, *Geometric, Physical, and Visual Optics*, 2nd ed. (2002)
   (geometric blur circle; from memory).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from . import validate
from .errors import ConfigError
from .grid import RetinalGrid
from .implant.target import implant_target
from .optics.aberration import (
    FocusError,
    blur_diameter_um,
    depth_to_defocus_d,
    focus_error_phase_rad,
    zero_order_focus_d,
)

__all__ = [
    "ToleranceRanges",
    "ToleranceCase",
    "ToleranceResult",
    "analyse_tolerance",
    "core_implant",
    "robust_implant_target",
]

#: Directions (degrees from +x) at which a lateral shift is tried.
SHIFT_DIRECTIONS_DEG = (0.0, 45.0, 90.0, 135.0, 180.0, 225.0, 270.0, 315.0)
#: Cylinder axes (degrees) at which an astigmatism is tried.
CYLINDER_AXES_DEG = (0.0, 45.0, 90.0, 135.0)
#: A core keeps at least this share of the photodiode's size.
MIN_CORE_SHARE = 0.25


def _pair(field: str, value, lim: float) -> tuple[float, float]:
    if isinstance(value, int | float) and not isinstance(value, bool):
        v = validate.number(field, value, lo=0, hi=lim)
        return (-v, v)
    if not isinstance(value, tuple | list) or len(value) != 2:
        raise ConfigError(field, value, "a half-width >= 0 or a pair [low, high]")
    lo = validate.number(f"{field}[0]", value[0], lo=-lim, hi=lim)
    hi = validate.number(f"{field}[1]", value[1], lo=-lim, hi=lim)
    if lo > hi:
        raise ConfigError(field, list(value), "a pair [low, high] with low <= high")
    return (lo, hi)


@dataclass(frozen=True)
class ToleranceRanges:
    """The ranges a tolerance analysis covers.

    Parameters
    ----------
    defocus_d : float or (float, float)
        Spherical error of the eye, dioptres: a half-width (``±value``) or a
        pair ``(low, high)``; at most 30 D.
    cylinder_d : float
        Largest astigmatism, dioptres (tried at ±value, axes 0°, 45°, 90°, 135°).
    depth_um : float or (float, float)
        The photodiodes' distance behind the plane of focus, µm, as for
        ``defocus_d``; at most 2000 µm.
    shift_um : float
        Largest lateral shift of the image on the implant, µm (tried in 8
        directions); at most 2000 µm.
    magnification_error : float
        Largest relative error of the image's scale on the implant (tried at
        ±value), in [0, 0.5).
    robust_design : bool
        Design implant-aware holograms for these ranges: the ON pixels' light
        is aimed at the photodiodes' cores, shrunk by the geometric blur of
        :meth:`design_defocus_d` (:func:`robust_implant_target`).
    """

    defocus_d: float | tuple[float, float] = 0.0
    cylinder_d: float = 0.0
    depth_um: float | tuple[float, float] = 0.0
    shift_um: float = 0.0
    magnification_error: float = 0.0
    robust_design: bool = False

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "defocus_d", _pair("tolerance.defocus_d", self.defocus_d, 30.0))
        set_(self, "depth_um", _pair("tolerance.depth_um", self.depth_um, 2000.0))
        set_(
            self,
            "cylinder_d",
            validate.number("tolerance.cylinder_d", self.cylinder_d, lo=0, hi=30),
        )
        set_(self, "shift_um", validate.number("tolerance.shift_um", self.shift_um, lo=0, hi=2000))
        set_(
            self,
            "magnification_error",
            validate.number(
                "tolerance.magnification_error",
                self.magnification_error,
                lo=0,
                hi=0.5,
                hi_open=True,
            ),
        )
        set_(self, "robust_design", validate.boolean("tolerance.robust_design", self.robust_design))

    def spherical_range_d(self, eye_focal_mm: float) -> tuple[float, float]:
        """The range of spherical error the cases span, dioptres: defocus plus the depth's
        share, widened by the cylinder (which adds up to its power along one meridian)."""
        dep = sorted(depth_to_defocus_d(v, eye_focal_mm) for v in self.depth_um)
        return (
            self.defocus_d[0] + dep[0] - self.cylinder_d,
            self.defocus_d[1] + dep[1] + self.cylinder_d,
        )

    def check_zero_order(self, system) -> None:
        """Refuse ranges under which the zero order may come to a focus on the retina.

        The exposure estimate is made for the eye as planned, where the Fresnel
        lens term keeps the zero order defocused; an eye whose error reaches
        :func:`stimplan.optics.aberration.zero_order_focus_d` would focus it into
        a spot the estimate does not cover.
        """
        d0 = zero_order_focus_d(system)
        if d0 is None:
            return
        lo, hi = self.spherical_range_d(system.eye.focal_length_mm)
        if lo <= d0 <= hi:
            raise ConfigError(
                "tolerance.defocus_d",
                [round(lo, 3), round(hi, 3)],
                f"a range of the eye's error that stays clear of {d0:+.3g} D",
                f"an eye {d0:+.3g} D off focuses the zero order (the Fresnel lens term "
                "f = {:g} mm, magnification {:g}) into a spot on the retina, which the "
                "exposure estimate, made for the eye as planned, does not cover; use a "
                "shorter lens term or a narrower range".format(
                    system.relay.fresnel_focal_mm, system.relay.magnification
                ),
            )

    def design_defocus_d(self, eye_focal_mm: float) -> float:
        """The largest blur of the ranges as a defocus, dioptres: the largest spherical
        error plus the depth's share (:func:`depth_to_defocus_d`) plus the cylinder."""
        sph = max(abs(v) for v in self.defocus_d)
        dep = max(abs(depth_to_defocus_d(v, eye_focal_mm)) for v in self.depth_um)
        return sph + dep + self.cylinder_d

    def to_dict(self) -> dict:
        """The ranges in the layout of the ``[tolerance]`` table."""
        return {
            "defocus_d": list(self.defocus_d),
            "cylinder_d": self.cylinder_d,
            "depth_um": list(self.depth_um),
            "shift_um": self.shift_um,
            "magnification_error": self.magnification_error,
            "robust_design": self.robust_design,
        }

    def focus_errors(self) -> list[FocusError]:
        """The focusing errors tried: each end of the spherical ranges (and 0 inside
        them), with each cylinder end at each axis; the in-focus case first."""
        sph = sorted(
            {*self.defocus_d, 0.0}
            if self.defocus_d[0] <= 0 <= self.defocus_d[1]
            else set(self.defocus_d)
        )
        dep = sorted(
            {*self.depth_um, 0.0}
            if self.depth_um[0] <= 0 <= self.depth_um[1]
            else set(self.depth_um)
        )
        cyl = [(0.0, 0.0)]
        if self.cylinder_d > 0:
            cyl += [(s * self.cylinder_d, a) for s in (1.0, -1.0) for a in CYLINDER_AXES_DEG]
        out = [
            FocusError(defocus_d=d, depth_um=z, cylinder_d=c, cylinder_axis_deg=a)
            for d in sph
            for z in dep
            for c, a in cyl
        ]
        return sorted(out, key=lambda e: not e.is_zero)

    def placements(self) -> list[tuple[float, float, float]]:
        """``(shift_x_um, shift_y_um, magnification_error)`` tried; the exact one first."""
        shifts = [(0.0, 0.0)]
        if self.shift_um > 0:
            shifts += [
                (
                    self.shift_um * math.cos(math.radians(t)),
                    self.shift_um * math.sin(math.radians(t)),
                )
                for t in SHIFT_DIRECTIONS_DEG
            ]
        eps = [0.0]
        if self.magnification_error > 0:
            eps += [self.magnification_error, -self.magnification_error]
        return [(x, y, e) for e in eps for (x, y) in shifts]


@dataclass(frozen=True)
class ToleranceCase:
    """One perturbed case: its focus error, placement and the pixel figures (µW)."""

    focus: FocusError
    shift_x_um: float
    shift_y_um: float
    magnification_error: float
    on_min_uw: float
    off_max_uw: float

    def as_dict(self) -> dict[str, float]:
        return {
            **dataclasses.asdict(self.focus),
            "shift_x_um": self.shift_x_um,
            "shift_y_um": self.shift_y_um,
            "magnification_error": self.magnification_error,
            "on_min_uw": self.on_min_uw,
            "off_max_uw": self.off_max_uw,
        }


@dataclass(frozen=True)
class ToleranceResult:
    """The per-pixel powers of one hologram over a :class:`ToleranceRanges`.

    ``nominal`` is the in-focus, exactly placed case; ``worst_on`` the case with
    the lowest ON-pixel power, ``worst_off`` the one with the highest OFF-pixel
    power (None without OFF pixels).
    """

    ranges: ToleranceRanges
    cases: tuple[ToleranceCase, ...]
    nominal: ToleranceCase
    worst_on: ToleranceCase
    worst_off: ToleranceCase | None

    @property
    def on_retained(self) -> float:
        """Worst ON-pixel minimum over the in-focus one."""
        n = self.nominal.on_min_uw
        return self.worst_on.on_min_uw / n if n > 0 else 0.0

    def as_dict(self) -> dict:
        return {
            "nominal": self.nominal.as_dict(),
            "worst_on": self.worst_on.as_dict(),
            "worst_off": None if self.worst_off is None else self.worst_off.as_dict(),
            "on_retained": self.on_retained,
            "cases": len(self.cases),
        }


def _placed(implant, grid: RetinalGrid, dx: float, dy: float, eps: float):
    moved = implant
    if dx or dy:
        moved = dataclasses.replace(
            implant, center_x_um=implant.center_x_um + dx, center_y_um=implant.center_y_um + dy
        )
    g = grid
    if eps:
        g = RetinalGrid(grid.shape, grid.pitch_x_um * (1 + eps), grid.pitch_y_um * (1 + eps))
    return moved, g


def analyse_tolerance(
    hologram,
    system,
    implant,
    on: np.ndarray,
    *,
    ranges: ToleranceRanges,
    oversample: int = 2,
    progress: Callable[[], None] | None = None,
) -> ToleranceResult:
    """Per-pixel powers of ``hologram`` over the cases of ``ranges``.

    Each focusing error gets its own prediction (:meth:`Hologram.predict` with
    the error's phase); each placement reads that prediction with the implant
    shifted, or with the image scaled by ``1 + ε`` (the grid's pitch scaled and
    the irradiance divided by ``(1 + ε)²``: the same power on a larger image).

    Parameters
    ----------
    hologram : Hologram
    system : OpticalSystem
    implant : Implant
    on : ndarray of bool
        Which pixels are ON (:func:`stimplan.implant.target.pixel_states`).
    ranges : ToleranceRanges
    oversample : int
        Prediction oversampling.
    progress : callable, optional
        Called once per prediction.

    Returns
    -------
    ToleranceResult
    """
    if not isinstance(ranges, ToleranceRanges):
        raise ConfigError("tolerance", ranges, "a ToleranceRanges")
    ranges.check_zero_order(system)
    on = np.asarray(on, dtype=bool)
    if on.shape != (implant.n_pixels,):
        raise ConfigError("on", on.shape, f"one flag per implant pixel ({implant.n_pixels})")
    if not on.any():
        raise ConfigError("on", "no pixel on", "at least one ON pixel")
    wl = system.illumination.wavelength_nm
    cases = []
    for err in ranges.focus_errors():
        phase = focus_error_phase_rad(system, err)
        pred = hologram.predict(system, oversample=oversample, focus_error_rad=phase)
        irr = pred.irradiance_mw_per_mm2
        for dx, dy, eps in ranges.placements():
            moved, g = _placed(implant, pred.grid, dx, dy, eps)
            moved.check_fits(g, field="tolerance.shift_um")
            scaled = irr if not eps else irr / np.float32((1 + eps) ** 2)
            power = moved.readout(scaled, g, wavelength_nm=wl).power_uw
            off = power[~on]
            cases.append(
                ToleranceCase(
                    err, dx, dy, eps, float(power[on].min()), float(off.max()) if off.size else 0.0
                )
            )
        if progress is not None:
            progress()
    nominal = cases[0]
    worst_on = min(cases, key=lambda c: c.on_min_uw)
    worst_off = None if on.all() else max(cases, key=lambda c: c.off_max_uw)
    return ToleranceResult(ranges, tuple(cases), nominal, worst_on, worst_off)


def core_implant(implant, *, margin_um: float):
    """The implant with each photodiode shrunk by ``margin_um`` (its size minus the
    margin, at least :data:`MIN_CORE_SHARE` of it): where to aim light that a blur of
    diameter ``margin_um`` must not spill off the photodiode."""
    m = validate.number("tolerance.core_margin_um", margin_um, lo=0, hi=implant.pitch_um)
    size = implant.active_size_um
    core = max(size - m, MIN_CORE_SHARE * size)
    return dataclasses.replace(implant, active_diameter_um=core, active_fraction=None)


def robust_implant_target(
    intensity: np.ndarray,
    grid: RetinalGrid,
    implant,
    system,
    *,
    defocus_d: float,
    threshold: float = 0.5,
    name: str = "implant-aware, robust",
):
    """An implant-aware target whose light is aimed at the photodiodes' cores.

    The cores are the photodiodes shrunk by the geometric blur diameter of
    ``defocus_d`` (:func:`stimplan.optics.aberration.blur_diameter_um`, the
    beam's diameter at the pupil times ``|ΔD| f_eye``): a point of the core
    blurred by that much still lands on its photodiode. The pixels that are ON
    are those of the real implant.
    """
    d = validate.number("tolerance.defocus_d", defocus_d, lo=-100, hi=100)
    blur = blur_diameter_um(system.beam_diameter_at_pupil_mm, d, system.eye.focal_length_mm)
    return implant_target(
        intensity,
        grid,
        core_implant(implant, margin_um=min(blur, implant.pitch_um)),
        threshold=threshold,
        name=name,
    )

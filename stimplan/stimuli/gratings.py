"""Gratings (square and sine) and checkerboards.

Both are rendered by exact box averages over each sample square: a sine
grating through the sinc factor of a box filter, a square grating through
the second primitive of the square wave, an axis-aligned checkerboard as the
product of two box-averaged square waves. Checkerboards at other angles are
supersampled along their edges.

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed., §2.1
   (convolution of a cosine with a rect: the sinc factor).
.. [2] J. V. Odom et al., "ISCEV standard for clinical visual evoked
   potentials (2016 update)", *Doc. Ophthalmol.* 133, 1 (2016)
   (pattern-reversal checkerboards).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Literal

import numpy as np

from .. import validate
from ..acuity import bar_width_um_from_px, cpd_from_period_um, period_um_from_cpd, um_per_deg_of
from ..errors import ConfigError
from ..grid import RetinalGrid
from ..optics.system import Eye
from .base import DEFAULT_SUPERSAMPLE, Figure, as_given, check_grid, positive, register

__all__ = ["Grating", "Checkerboard", "square_wave_box_mean"]

WAVEFORMS = ("square", "sine")


def _square_primitive(t: np.ndarray, duty: float) -> np.ndarray:
    """First primitive of the square wave that is 1 on [-duty/2, duty/2) mod 1."""
    tau = t + duty / 2.0
    n = np.floor(tau)
    phi = tau - n
    return n * duty + np.minimum(phi, duty)


def _square_second_primitive(t: np.ndarray, duty: float) -> np.ndarray:
    """Second primitive of the same square wave."""
    tau = t + duty / 2.0
    n = np.floor(tau)
    phi = tau - n
    h = np.where(phi < duty, 0.5 * phi * phi, 0.5 * duty * duty + duty * (phi - duty))
    return duty * n * (n - 1.0) / 2.0 + n * (duty - duty * duty / 2.0) + n * duty * phi + h


def square_wave_box_mean(t: np.ndarray, half_a: float, half_b: float, duty: float) -> np.ndarray:
    """Mean of a unit-period square wave over ``t + U1 + U2``.

    The wave is 1 on ``[-duty/2, duty/2)`` modulo 1 and 0 elsewhere; ``U1``
    and ``U2`` are uniform on ``[-half_a, half_a]`` and ``[-half_b, half_b]``
    (the projection of a sample square onto the grating direction). Exact:
    differences of the second primitive of the wave.

    Parameters
    ----------
    t : ndarray
        Phase of the sample centres, periods.
    half_a, half_b : float
        Half-widths, periods, >= 0 (not both 0).
    duty : float
        Fraction of the period that is 1, in (0, 1).

    Returns
    -------
    ndarray
        float64 values in [0, 1].
    """
    t = np.mod(t, 1.0)
    a, b = max(half_a, half_b), min(half_a, half_b)
    if a == 0.0:
        return (np.mod(t + duty / 2.0, 1.0) < duty).astype(np.float64)
    if b < 1e-6 * a:
        mean = (_square_primitive(t + a, duty) - _square_primitive(t - a, duty)) / (2.0 * a)
    else:
        g = _square_second_primitive
        mean = g(t + a + b, duty) - g(t + a - b, duty) - g(t - a + b, duty) + g(t - a - b, duty)
        mean /= 4.0 * a * b
    return np.clip(mean, 0.0, 1.0)


def _projected_half_widths(grid: RetinalGrid, rotation_deg: float) -> tuple[float, float]:
    c = math.cos(math.radians(rotation_deg))
    s = math.sin(math.radians(rotation_deg))
    return abs(c) * grid.pitch_x_um / 2.0, abs(s) * grid.pitch_y_um / 2.0


@register
@dataclass(frozen=True, kw_only=True)
class Grating(Figure):
    """A periodic grating of bars.

    Parameters
    ----------
    period_um : float
        Period on the retina, µm, > 0.
    waveform : {"square", "sine"}
        Square bars or a sinusoidal profile.
    phase_deg : float
        Phase at the centre point: at 0 a bright bar (square) or the peak
        (sine) is centred on ``(center_x_um, center_y_um)``; positive values
        move the pattern towards -u by ``phase/360`` periods.
    duty_cycle : float
        Fraction of the period that is bright (square), in (0, 1).
    rotation_deg : float
        Orientation: 0 gives vertical bars (modulation along x), 90
        horizontal bars.
    contrast, polarity, center_x_um, center_y_um
        See :class:`~stimplan.stimuli.base.Figure`.

    Notes
    -----
    With a sine profile the image is ``0.5 (1 + cos(2π t))`` before the
    contrast levels are applied; "sine" names the profile family. The bar
    width of a grating is half its period.
    """

    kind = "grating"

    period_um: float
    waveform: Literal["square", "sine"] = "square"
    phase_deg: float = 0.0
    duty_cycle: float = 0.5

    def __post_init__(self) -> None:
        super().__post_init__()
        f = object.__setattr__
        f(self, "period_um", positive(self.kind, "period_um", self.period_um))
        f(self, "waveform", validate.choice("grating.waveform", self.waveform, WAVEFORMS))
        f(self, "phase_deg", validate.physical("grating.phase_deg", self.phase_deg, "angle_deg"))
        f(
            self,
            "duty_cycle",
            validate.number(
                "grating.duty_cycle", self.duty_cycle, lo=0, hi=1, lo_open=True, hi_open=True
            ),
        )

    @property
    def bar_width_um(self) -> float:
        """Half the period, µm."""
        return self.period_um / 2.0

    def cycles_per_deg(self, eye: Eye | float) -> float:
        """Spatial frequency in cycles per degree for ``eye``."""

        return cpd_from_period_um(self.period_um, eye)

    @classmethod
    def from_cycles_per_deg(cls, cycles_per_deg: float, eye: Eye | float, **kwargs: Any) -> Grating:
        """A grating of ``cycles_per_deg`` on the retina of ``eye``."""
        return cls(period_um=period_um_from_cpd(cycles_per_deg, eye), **kwargs)

    @classmethod
    def from_bar_width_px(cls, bar_width_px: float, pitch_um: float, **kwargs: Any) -> Grating:
        """A grating whose bars are ``bar_width_px`` implant pixels wide (period = 2 bars)."""
        return cls(period_um=2.0 * bar_width_um_from_px(bar_width_px, pitch_um), **kwargs)

    @classmethod
    def _alternatives(cls) -> tuple[str, ...]:
        return ("cycles_per_deg", "bar_width_um", "bar_width_px", "pitch_um")

    @classmethod
    def _build(cls, p: dict[str, Any], *, eye: Any, pitch_um: Any) -> Grating:
        sizes = [
            k for k in ("period_um", "cycles_per_deg", "bar_width_um", "bar_width_px") if k in p
        ]
        if len(sizes) != 1:
            raise ConfigError(
                "grating.period_um",
                p.get("period_um"),
                "exactly one of period_um, period_deg, cycles_per_deg, bar_width_um, bar_width_px",
            )
        key = sizes[0]
        value = p[key]
        try:
            return cls._build_size(p, eye=eye, pitch_um=p.pop("pitch_um", pitch_um))
        except ConfigError as exc:
            if key != "period_um" and exc.field == "grating.period_um":
                raise as_given(exc, f"grating.{key}", value) from None
            raise

    @classmethod
    def _build_size(cls, p: dict[str, Any], *, eye: Any, pitch_um: Any) -> Grating:
        pitch = pitch_um
        if "cycles_per_deg" in p:
            if eye is None:
                raise ConfigError(
                    "grating.cycles_per_deg", p["cycles_per_deg"], "an eye to convert"
                )
            return cls.from_cycles_per_deg(p.pop("cycles_per_deg"), eye, **p)
        if "bar_width_um" in p:
            b = positive("grating", "bar_width_um", p.pop("bar_width_um"))
            return cls(period_um=2.0 * b, **p)
        if "bar_width_px" in p:
            if pitch is None:
                raise ConfigError(
                    "grating.bar_width_px", p["bar_width_px"], "an implant pitch_um to convert"
                )
            return cls.from_bar_width_px(p.pop("bar_width_px"), pitch, **p)
        return cls(**p)

    def coverage(self, grid: RetinalGrid, *, supersample: int = DEFAULT_SUPERSAMPLE) -> np.ndarray:
        """Box-averaged grating profile on ``grid``, float32 in [0, 1] (exact area average)."""
        grid = check_grid(grid)
        c = math.cos(math.radians(self.rotation_deg))
        s = math.sin(math.radians(self.rotation_deg))
        X, Y = grid.coords_um()
        u_x = (X - self.center_x_um) * (c / self.period_um)
        u_y = (Y - self.center_y_um) * (s / self.period_um)
        # bars along an axis: the profile of one row (or column), repeated
        if abs(s) < 1e-12:
            t = u_x + self.phase_deg / 360.0  # (1, cols), periods
        elif abs(c) < 1e-12:
            t = u_y + self.phase_deg / 360.0  # (rows, 1)
        else:
            t = u_x + u_y + self.phase_deg / 360.0  # (rows, cols)
        ha, hb = _projected_half_widths(grid, self.rotation_deg)
        ha /= self.period_um
        hb /= self.period_um
        if self.waveform == "sine":
            damp = np.sinc(2.0 * ha) * np.sinc(2.0 * hb)
            out = 0.5 + 0.5 * damp * np.cos(2.0 * np.pi * np.mod(t, 1.0))
        else:
            out = square_wave_box_mean(t, ha, hb, self.duty_cycle)
        out = np.clip(out, 0.0, 1.0).astype(np.float32)
        return np.ascontiguousarray(np.broadcast_to(out, grid.shape))


@register
@dataclass(frozen=True, kw_only=True)
class Checkerboard(Figure):
    """A checkerboard of square checks.

    Parameters
    ----------
    check_um : float
        Side of one check, µm, > 0.
    reversal : bool
        False: the check whose lower-left corner is the centre point is
        bright; True: the contrast-reversed partner (see :meth:`reversed`).
    rotation_deg, contrast, polarity, center_x_um, center_y_um
        See :class:`~stimplan.stimuli.base.Figure`.

    References
    ----------
    .. [1] Odom et al., *Doc. Ophthalmol.* 133, 1 (2016) (ISCEV checks of 1°
       and 0.25°).
    """

    kind = "checkerboard"

    check_um: float
    reversal: bool = False

    def __post_init__(self) -> None:
        super().__post_init__()
        object.__setattr__(self, "check_um", positive(self.kind, "check_um", self.check_um))
        object.__setattr__(
            self, "reversal", validate.boolean("checkerboard.reversal", self.reversal)
        )

    def reversed(self) -> Checkerboard:
        """The pattern-reversal partner (bright and dark checks swapped)."""
        return replace(self, reversal=not self.reversal)

    @classmethod
    def from_check_deg(cls, check_deg: float, eye: Eye | float, **kwargs: Any) -> Checkerboard:
        """Checks of ``check_deg`` degrees of visual angle."""

        deg = validate.number("checkerboard.check_deg", check_deg, lo=0, lo_open=True)
        return cls(check_um=deg * um_per_deg_of(eye), **kwargs)

    def _inside(self, u: np.ndarray, w: np.ndarray) -> np.ndarray:
        parity = (np.floor(u / self.check_um) + np.floor(w / self.check_um)) % 2 == 0
        return parity != self.reversal

    def coverage(self, grid: RetinalGrid, *, supersample: int = DEFAULT_SUPERSAMPLE) -> np.ndarray:
        """Checks on ``grid``, float32 in [0, 1] (exact when the rotation is a multiple of 90°)."""
        grid = check_grid(grid)
        quarter = self.rotation_deg / 90.0
        if quarter != round(quarter):
            return super().coverage(grid, supersample=supersample)
        turns = int(round(quarter)) % 4
        c, s = [(1, 0), (0, 1), (-1, 0), (0, -1)][turns]
        X, Y = grid.coords_um()
        dx, dy = X - self.center_x_um, Y - self.center_y_um
        period = 2.0 * self.check_um
        hx = grid.pitch_x_um / 2.0 / period
        hy = grid.pitch_y_um / 2.0 / period
        # local u, w are functions of one world axis each
        if c != 0:
            tu, hu = c * dx / period, hx
            tw, hw = c * dy / period, hy
        else:
            tu, hu = s * dy / period, hy
            tw, hw = -s * dx / period, hx
        # square wave +-1, +1 on [0, 0.5) mod 1: shift the centred wave by 1/4
        su = 2.0 * square_wave_box_mean(tu - 0.25, hu, 0.0, 0.5) - 1.0
        sw = 2.0 * square_wave_box_mean(tw - 0.25, hw, 0.0, 0.5) - 1.0
        cov = 0.5 * (1.0 + su * sw)
        if self.reversal:
            cov = 1.0 - cov
        return np.clip(cov, 0.0, 1.0).astype(np.float32)

    @classmethod
    def _alternatives(cls) -> tuple[str, ...]:
        return ()

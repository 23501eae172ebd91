"""Simple shapes: spot, bar, annulus, full-field flash and blank."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid
from .base import Figure, Stimulus, check_grid, positive, register

__all__ = ["Spot", "Bar", "Annulus", "Flash", "Blank"]


@register
@dataclass(frozen=True, kw_only=True)
class Spot(Figure):
    """A uniform disc.

    Parameters
    ----------
    diameter_um : float
        Diameter on the retina, µm, > 0.
    """

    kind = "spot"

    diameter_um: float

    def __post_init__(self) -> None:
        super().__post_init__()
        object.__setattr__(
            self, "diameter_um", positive(self.kind, "diameter_um", self.diameter_um)
        )

    def _local_bbox(self) -> tuple[float, float, float, float]:
        r = self.diameter_um / 2.0
        return (-r, r, -r, r)

    def _inside(self, u: np.ndarray, w: np.ndarray) -> np.ndarray:
        r = self.diameter_um / 2.0
        return u * u + w * w <= r * r


@register
@dataclass(frozen=True, kw_only=True)
class Bar(Figure):
    """A uniform rectangle.

    Parameters
    ----------
    width_um : float
        Extent along x before rotation, µm, > 0.
    length_um : float
        Extent along y before rotation, µm, > 0 (a vertical bar at
        ``rotation_deg = 0``).
    """

    kind = "bar"

    width_um: float
    length_um: float

    def __post_init__(self) -> None:
        super().__post_init__()
        object.__setattr__(self, "width_um", positive(self.kind, "width_um", self.width_um))
        object.__setattr__(self, "length_um", positive(self.kind, "length_um", self.length_um))

    def _local_bbox(self) -> tuple[float, float, float, float]:
        a, b = self.width_um / 2.0, self.length_um / 2.0
        return (-a, a, -b, b)

    def _inside(self, u: np.ndarray, w: np.ndarray) -> np.ndarray:
        return (np.abs(u) <= self.width_um / 2.0) & (np.abs(w) <= self.length_um / 2.0)


@register
@dataclass(frozen=True, kw_only=True)
class Annulus(Figure):
    """A uniform ring.

    Parameters
    ----------
    inner_diameter_um : float
        Inner diameter, µm, >= 0.
    outer_diameter_um : float
        Outer diameter, µm, > inner diameter.
    """

    kind = "annulus"

    inner_diameter_um: float
    outer_diameter_um: float

    def __post_init__(self) -> None:
        super().__post_init__()
        inner = validate.number("annulus.inner_diameter_um", self.inner_diameter_um, lo=0.0)
        outer = positive(self.kind, "outer_diameter_um", self.outer_diameter_um)
        if outer <= inner:
            raise ConfigError(
                "annulus.outer_diameter_um", outer, f"> inner_diameter_um ({inner:g} µm)"
            )
        object.__setattr__(self, "inner_diameter_um", inner)
        object.__setattr__(self, "outer_diameter_um", outer)

    def _local_bbox(self) -> tuple[float, float, float, float]:
        r = self.outer_diameter_um / 2.0
        return (-r, r, -r, r)

    def _inside(self, u: np.ndarray, w: np.ndarray) -> np.ndarray:
        r2 = u * u + w * w
        ri, ro = self.inner_diameter_um / 2.0, self.outer_diameter_um / 2.0
        return (r2 <= ro * ro) & (r2 >= ri * ri)


@register
@dataclass(frozen=True, kw_only=True)
class Flash(Stimulus):
    """A uniform full-field flash.

    Parameters
    ----------
    level : float
        Relative irradiance everywhere, in [0, 1].
    """

    kind = "flash"

    level: float = 1.0

    def __post_init__(self) -> None:
        object.__setattr__(
            self, "level", validate.number("flash.level", self.level, lo=0.0, hi=1.0)
        )

    def render(self, grid: RetinalGrid) -> np.ndarray:
        grid = check_grid(grid)
        return np.full(grid.shape, self.level, dtype=np.float32)


@register
@dataclass(frozen=True, kw_only=True)
class Blank(Stimulus):
    """No light (a dark frame, e.g. between pulses)."""

    kind = "blank"

    def render(self, grid: RetinalGrid) -> np.ndarray:
        grid = check_grid(grid)
        return np.zeros(grid.shape, dtype=np.float32)

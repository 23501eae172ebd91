"""The implant: pixel lattice, outline, active areas, acuity and the checks of its fields."""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from functools import cached_property
from typing import Any, Literal

import numpy as np

from .. import validate
from ..acuity import GratingAcuity, nyquist_acuity
from ..errors import ConfigError
from ..grid import RetinalGrid
from ..optics.system import Eye
from .checks import (
    REGIONS,
    check_fields,
)
from .geometry import (
    SQRT3,
    regular_polygon,
    rotate_um,
)
from .lattice import lattice_um
from .raster import ImplantRaster, PixelReadout, pixel_readout, rasterize
from .strength_duration import StrengthDuration

__all__ = ["Implant", "PixelResponse"]


@dataclass(frozen=True, kw_only=True)
class PixelResponse:
    """The fields of an :class:`Implant` that say how its pixels answer light.

    Parameters
    ----------
    responsivity_a_per_w : float, optional
        Responsivity of one photodiode at the illumination wavelength, A/W, in
        (0, 0.9] and at most the silicon limit ``e λ / (h c)`` there. None: the
        silicon limit, an upper bound (:mod:`stimplan.implant.photodiode`).
    diodes_in_series : int
        Photodiodes in series per pixel, each on ``1/n`` of the active area, in
        [1, 16]; the pixel's current is ``responsivity × power / n``.
    threshold_rheobase_mw_per_mm2 : float, optional
        Rheobase of a strength–duration threshold, mW/mm² of photodiode
        irradiance (:mod:`stimplan.implant.strength_duration`); with
        ``threshold_chronaxie_ms``, instead of a threshold range.
    threshold_chronaxie_ms : float, optional
        Its chronaxie, ms.
    threshold_law : {"weiss", "lapicque"}, optional
        Its law (``"weiss"`` when a curve is given without one).
    threshold_pulse_range_ms : pair of float, optional
        The pulse widths the curve holds for; other pulses are refused.
    """

    responsivity_a_per_w: float | None = None
    diodes_in_series: int = 1
    threshold_rheobase_mw_per_mm2: float | None = None
    threshold_chronaxie_ms: float | None = None
    threshold_law: str | None = None
    threshold_pulse_range_ms: tuple[float, float] | None = None

    @cached_property
    def strength_duration(self) -> StrengthDuration | None:
        """The strength–duration threshold, or None when the implant has none."""
        if self.threshold_rheobase_mw_per_mm2 is None:
            return None
        return StrengthDuration(
            rheobase_mw_per_mm2=self.threshold_rheobase_mw_per_mm2,
            chronaxie_ms=self.threshold_chronaxie_ms,
            law=self.threshold_law or "weiss",
            pulse_range_ms=self.threshold_pulse_range_ms,
            source=getattr(self, "threshold_source", None)
            or "given by the user ([implant] threshold_rheobase_mw_per_mm2)",
        )


@dataclass(frozen=True, kw_only=True)
class Implant(PixelResponse):
    """A photovoltaic pixel array placed on the retina.

    Parameters
    ----------
    pitch_um : float
        Centre-to-centre pixel distance, µm, > 0.
    layout : {"hex", "square"}
        Lattice.
    outline : {"hexagon", "circle", "square", "rectangle"}
        Shape of the array.
    diameter_um : float, optional
        Size of a ``"hexagon"`` (corner to corner) or ``"circle"`` outline.
    width_um, height_um : float, optional
        Size of a ``"square"`` (``width_um``) or ``"rectangle"`` outline.
    rows, cols : int, optional
        Instead of a size: a block of ``rows`` rows of ``cols`` pixels
        (``"square"`` or ``"rectangle"`` outline).
    rings : int, optional
        Instead of a size, for a hexagonal lattice in a ``"hexagon"`` outline:
        the centred patch of ``3k(k+1)+1`` pixels.
    pixel_inclusion : {"center", "cell"}
        Whether a pixel's centre or its whole cell must lie inside the outline
        (not used with ``rings`` or ``rows``/``cols``, which name the pixels).
    active_shape : {"hexagon", "circle", "square"}
        Photodiode shape (hexagon oriented like the hexagonal cell, square
        with sides along the lattice rows).
    active_fraction : float, optional
        Photodiode area as a fraction of the cell area, in (0, 1].
    active_diameter_um : float, optional
        Instead of ``active_fraction``: the photodiode size, µm (circle:
        diameter; hexagon: across the flats; square: side).
    trench_um : float
        Width of the trench between neighbouring cells, µm, in [0, pitch).
        The photodiode must fit inside its cell shrunk by half the trench on
        every side.
    center_x_um, center_y_um : float
        Position of the array centre on the retina, µm.
    rotation_deg : float
        Counter-clockwise rotation of the array on the retina, degrees.
    name : str
        A label.
    threshold_mw_per_mm2 : pair of float, optional
        Stimulation threshold range ``(low, high)`` of photodiode irradiance, mW/mm²
        (:mod:`stimplan.implant.threshold`); None when no source gives one.
    threshold_source : str, optional
        Where that range (or the strength–duration curve) comes from.
    responsivity_a_per_w, diodes_in_series, threshold_rheobase_mw_per_mm2, ...
        How the pixels answer light: the fields of :class:`PixelResponse`.

    Notes
    -----
    Derived geometry (pixel centres, areas) is computed on first use and
    cached; the object itself is immutable.

    References
    ----------
    .. [1] Mathieson et al., *Nat. Photonics* 6, 391 (2012).
    .. [2] Palanker et al., *Ophthalmology* 127, 1097 (2020).
    """

    pitch_um: float
    layout: Literal["hex", "square"] = "hex"
    outline: Literal["hexagon", "circle", "square", "rectangle"] = "hexagon"
    diameter_um: float | None = None
    width_um: float | None = None
    height_um: float | None = None
    rows: int | None = None
    cols: int | None = None
    rings: int | None = None
    pixel_inclusion: Literal["center", "cell"] = "center"
    active_shape: Literal["hexagon", "circle", "square"] = "hexagon"
    active_fraction: float | None = None
    active_diameter_um: float | None = None
    trench_um: float = 0.0
    center_x_um: float = 0.0
    center_y_um: float = 0.0
    rotation_deg: float = 0.0
    name: str = "custom"
    threshold_mw_per_mm2: tuple[float, float] | None = None
    threshold_source: str | None = None

    def __post_init__(self) -> None:
        check_fields(self)

    @property
    def cell_area_um2(self) -> float:
        """Area of one pixel cell, µm² (hex: ``√3/2 p²``; square: ``p²``)."""
        p = self.pitch_um
        return SQRT3 / 2.0 * p * p if self.layout == "hex" else p * p

    @property
    def active_size_um(self) -> float:
        """Photodiode size, µm: circle diameter, hexagon flat-to-flat, or square side."""
        if self.active_diameter_um is not None:
            return self.active_diameter_um
        area = self.active_fraction * self.cell_area_um2
        if self.active_shape == "circle":
            return 2.0 * math.sqrt(area / math.pi)
        if self.active_shape == "hexagon":
            return math.sqrt(area / (SQRT3 / 2.0))
        return math.sqrt(area)

    @property
    def active_area_um2(self) -> float:
        """Geometric photodiode area of one pixel, µm²."""
        s = self.active_size_um
        if self.active_shape == "circle":
            return math.pi * s * s / 4.0
        if self.active_shape == "hexagon":
            return SQRT3 / 2.0 * s * s
        return s * s

    @property
    def active_fraction_of_cell(self) -> float:
        """Photodiode area / cell area."""
        return self.active_area_um2 / self.cell_area_um2

    def polygon_local_um(self, region: str) -> np.ndarray:
        """Vertices (V, 2) of the region's polygon in the array frame, counter-clockwise."""
        if region == "cell":
            if self.layout == "hex":
                return regular_polygon(6, self.pitch_um / SQRT3, 30.0)
            h = self.pitch_um / 2.0
            return np.array([[h, h], [-h, h], [-h, -h], [h, -h]])
        s = self.active_size_um
        if self.active_shape == "hexagon":
            return regular_polygon(6, s / SQRT3, 30.0)
        if self.active_shape == "square":
            h = s / 2.0
            return np.array([[h, h], [-h, h], [-h, -h], [h, -h]])
        raise ValueError("a circle has no polygon")  # pragma: no cover - internal

    @cached_property
    def _lattice(self) -> tuple[np.ndarray, np.ndarray]:
        return lattice_um(self)

    @property
    def n_pixels(self) -> int:
        """Number of pixels."""
        return int(self._lattice[0].shape[0])

    @property
    def local_centers_um(self) -> np.ndarray:
        """Pixel centres ``(x, y)`` in the array frame (before placement), µm, shape (n, 2)."""
        return self._lattice[0]

    @property
    def lattice_rows(self) -> np.ndarray:
        """Lattice row of each pixel (0 through the array centre, positive upwards)."""
        return self._lattice[1]

    @cached_property
    def centers_um(self) -> np.ndarray:
        """Pixel centres ``(x, y)`` on the retina, µm, shape (n, 2), read-only."""
        xy = rotate_um(self._lattice[0], self.rotation_deg)
        xy[:, 0] += self.center_x_um
        xy[:, 1] += self.center_y_um
        xy.setflags(write=False)
        return xy

    def pixel_polygons_um(self, region: str = "active", circle_vertices: int = 32) -> np.ndarray:
        """Outline of every pixel's region on the retina, shape (n, V, 2), ``(x, y)`` µm.

        Circles are drawn as regular polygons of ``circle_vertices`` corners
        (for display; rasterising uses the exact disc).
        """
        region = validate.choice("region", region, REGIONS)
        if region == "active" and self.active_shape == "circle":
            nv = validate.integer("circle_vertices", circle_vertices, lo=3, hi=1024)
            verts = regular_polygon(nv, self.active_size_um / 2.0, 0.0)
        else:
            verts = rotate_um(self.polygon_local_um(region), self.rotation_deg)
        return self.centers_um[:, None, :] + verts[None, :, :]

    @cached_property
    def footprint_extent_um(self) -> tuple[float, float, float, float]:
        """``(x_min, x_max, y_min, y_max)`` on the retina of all pixel cells, µm."""
        verts = rotate_um(self.polygon_local_um("cell"), self.rotation_deg)
        c = self.centers_um
        xs = c[:, 0, None] + verts[None, :, 0]
        ys = c[:, 1, None] + verts[None, :, 1]
        return (float(xs.min()), float(xs.max()), float(ys.min()), float(ys.max()))

    @property
    def footprint_width_um(self) -> float:
        """Width of the footprint's bounding box along x, µm."""
        e = self.footprint_extent_um
        return e[1] - e[0]

    def grating_acuity(self, eye: Eye | float) -> GratingAcuity:
        """Sampling-limited grating acuity (bar width = one pitch).

        References
        ----------
        .. [1] Lorach et al., *Nat. Med.* 21, 476 (2015); Ho et al.,
           *J. Neural Eng.* 16, 066027 (2019).
        """
        return nyquist_acuity(self.pitch_um, eye)

    def grating_acuity_cpd(self, eye: Eye | float) -> float:
        """Sampling-limited grating acuity in cycles/deg, ``um_per_deg / (2 pitch)``."""
        return self.grating_acuity(eye).cycles_per_deg

    def fits_in(self, grid: RetinalGrid) -> bool:
        """Whether every pixel cell lies inside the grid's field."""
        x0, x1, y0, y1 = grid.extent_um
        e = self.footprint_extent_um
        tol = 1e-9 * max(grid.width_um, grid.height_um)
        return e[0] >= x0 - tol and e[1] <= x1 + tol and e[2] >= y0 - tol and e[3] <= y1 + tol

    def check_fits(self, grid: RetinalGrid, *, field: str = "implant") -> None:
        """Raise :class:`ConfigError` unless every pixel cell lies inside the grid's field."""
        if not self.fits_in(grid):
            x0, x1, y0, y1 = grid.extent_um
            e = self.footprint_extent_um
            raise ConfigError(
                field,
                f"x [{e[0]:.1f}, {e[1]:.1f}], y [{e[2]:.1f}, {e[3]:.1f}] µm",
                f"inside the retinal field x [{x0:.1f}, {x1:.1f}], y [{y0:.1f}, {y1:.1f}] µm",
                "move, shrink or rotate the implant, or widen the field",
            )

    def rasterize(
        self, grid: RetinalGrid, region: str = "active", *, check_fit: bool = True
    ) -> ImplantRaster:
        """Area-weighted coverage of the grid's samples by each pixel (:func:`rasterize`)."""
        return rasterize(self, grid, region, check_fit=check_fit)

    def readout(
        self,
        irradiance_mw_per_mm2: np.ndarray,
        grid: RetinalGrid,
        *,
        responsivity_a_per_w: float | None = None,
        wavelength_nm: float = 880.0,
    ) -> PixelReadout:
        """Light on each pixel's photodiode and its current (:func:`pixel_readout`)."""
        return pixel_readout(
            self,
            irradiance_mw_per_mm2,
            grid,
            responsivity_a_per_w=responsivity_a_per_w,
            wavelength_nm=wavelength_nm,
        )

    def to_dict(self) -> dict[str, Any]:
        """Field values, unset ones left out (``Implant(**d)`` rebuilds the implant)."""
        out = {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}
        return {k: val for k, val in out.items() if val is not None}

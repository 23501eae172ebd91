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
from ..system import Eye
from .geometry import (
    SQRT3,
    centred_hexagonal_number,
    regular_polygon,
    rotate_um,
    silicon_responsivity_limit_a_per_w,
)
from .raster import ImplantRaster, PixelReadout, pixel_sums, rasterize_cached

__all__ = [
    "LAYOUTS",
    "OUTLINES",
    "ACTIVE_SHAPES",
    "INCLUSIONS",
    "REGIONS",
    "MAX_IMPLANT_PIXELS",
    "Implant",
]


LAYOUTS = ("hex", "square")


OUTLINES = ("hexagon", "circle", "square", "rectangle")


ACTIVE_SHAPES = ("hexagon", "circle", "square")


INCLUSIONS = ("center", "cell")


REGIONS = ("active", "cell")


#: Largest number of lattice pixels an implant may have.
MAX_IMPLANT_PIXELS = 200_000


@dataclass(frozen=True, kw_only=True)
class Implant:
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

    def __post_init__(self) -> None:
        f = object.__setattr__
        pitch = validate.number("implant.pitch_um", self.pitch_um, lo=0, lo_open=True)
        f(self, "pitch_um", pitch)
        f(self, "layout", validate.choice("implant.layout", self.layout, LAYOUTS))
        f(self, "outline", validate.choice("implant.outline", self.outline, OUTLINES))
        f(
            self,
            "pixel_inclusion",
            validate.choice("implant.pixel_inclusion", self.pixel_inclusion, INCLUSIONS),
        )
        f(
            self,
            "active_shape",
            validate.choice("implant.active_shape", self.active_shape, ACTIVE_SHAPES),
        )
        f(
            self,
            "trench_um",
            validate.number("implant.trench_um", self.trench_um, lo=0.0, hi=pitch, hi_open=True),
        )
        for name in ("center_x_um", "center_y_um", "rotation_deg"):
            f(self, name, validate.number(f"implant.{name}", getattr(self, name)))
        if not isinstance(self.name, str):
            raise ConfigError("implant.name", self.name, "a string")
        self._check_size()
        self._check_active()
        n = self.n_pixels
        if n == 0:
            raise ConfigError(
                "implant",
                self._size_text(),
                "an outline that holds at least one pixel",
                f"pitch {pitch:g} µm",
            )

    # -- validation ----------------------------------------------------------
    def _size_text(self) -> str:
        parts = []
        for k in ("diameter_um", "width_um", "height_um", "rows", "cols", "rings"):
            if getattr(self, k) is not None:
                parts.append(f"{k}={getattr(self, k)}")
        return f"{self.outline} outline, " + ", ".join(parts)

    def _check_size(self) -> None:
        f = object.__setattr__
        given = {
            k: getattr(self, k)
            for k in ("diameter_um", "width_um", "height_um", "rows", "cols", "rings")
            if getattr(self, k) is not None
        }
        uses_block = "rows" in given or "cols" in given
        if self.outline == "hexagon":
            need = {"rings"} if "rings" in given else {"diameter_um"}
        elif self.outline == "circle":
            need = {"diameter_um"}
        elif self.outline == "square":
            need = {"rows", "cols"} if uses_block else {"width_um"}
        else:
            need = {"rows", "cols"} if uses_block else {"width_um", "height_um"}
        extra = set(given) - need
        missing = need - set(given)
        if missing or extra:
            options = {
                "hexagon": "diameter_um (corner to corner) or rings",
                "circle": "diameter_um",
                "square": "width_um, or rows and cols",
                "rectangle": "width_um and height_um, or rows and cols",
            }[self.outline]
            bad = sorted(missing or extra)[0]
            raise ConfigError(
                f"implant.{bad}",
                given.get(bad),
                f"a {self.outline} outline is sized by {options}",
                "missing" if missing else "not used with this outline",
            )
        for k in ("diameter_um", "width_um", "height_um"):
            if k in given:
                f(self, k, validate.number(f"implant.{k}", given[k], lo=0, lo_open=True))
        for k in ("rows", "cols"):
            if k in given:
                f(self, k, validate.integer(f"implant.{k}", given[k], lo=1, hi=MAX_IMPLANT_PIXELS))
        if "rings" in given:
            f(self, "rings", validate.integer("implant.rings", given["rings"], lo=0, hi=250))
            if self.layout != "hex":
                raise ConfigError("implant.rings", self.rings, "only with layout 'hex'")
        if self.outline == "square" and self.rows is not None and self.rows != self.cols:
            raise ConfigError(
                "implant.cols", self.cols, f"equal to rows ({self.rows}) for a square outline"
            )
        # bound the lattice size before building it
        cell = self.cell_area_um2
        if self.rows is not None:
            count = self.rows * self.cols
        elif self.rings is not None:
            count = centred_hexagonal_number(self.rings)
        else:
            w, h = self._outline_half_extent()
            count = int(4 * (w + self.pitch_um) * (h + self.pitch_um) / cell)
        if count > MAX_IMPLANT_PIXELS:
            raise ConfigError(
                "implant",
                self._size_text(),
                f"at most {MAX_IMPLANT_PIXELS} pixels",
                f"about {count} pixels of pitch {self.pitch_um:g} µm",
            )

    def _check_active(self) -> None:
        f = object.__setattr__
        frac, diam = self.active_fraction, self.active_diameter_um
        if (frac is None) == (diam is None):
            raise ConfigError(
                "implant.active_fraction",
                frac,
                "in (0, 1], or give active_diameter_um instead (exactly one of the two)",
            )
        if frac is not None:
            frac = validate.number("implant.active_fraction", frac, lo=0, hi=1, lo_open=True)
            f(self, "active_fraction", frac)
            field, value = "implant.active_fraction", frac
        else:
            diam = validate.number("implant.active_diameter_um", diam, lo=0, lo_open=True)
            f(self, "active_diameter_um", diam)
            field, value = "implant.active_diameter_um", diam
        # does the photodiode fit inside the cell minus the trench?
        inset = 0.5 * (self.pitch_um - self.trench_um)
        normals = self._cell_normals()
        support = self._active_support(normals)
        ratio = float(np.min(inset / support))
        if ratio < 1.0 - 1e-9:
            top = value * ratio**2 if frac is not None else value * ratio
            raise ConfigError(
                field,
                value,
                f"<= {top:.4g}" if frac is None else f"in (0, {top:.4g}]",
                f"a {self.active_shape} photodiode must fit inside the {self.layout} cell of "
                f"pitch {self.pitch_um:g} µm minus a {self.trench_um:g} µm trench",
            )

    # -- geometry of one pixel (array frame, before rotation) ------------------
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

    def _cell_normals(self) -> np.ndarray:
        deg = np.arange(0, 360, 60) if self.layout == "hex" else np.arange(0, 360, 90)
        rad = np.deg2rad(deg)
        return np.stack([np.cos(rad), np.sin(rad)], axis=1)

    def _active_support(self, normals: np.ndarray) -> np.ndarray:
        s = self.active_size_um
        if self.active_shape == "circle":
            return np.full(len(normals), s / 2.0)
        verts = self.polygon_local_um("active")
        return np.max(normals @ verts.T, axis=1)

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

    # -- lattice -------------------------------------------------------------------
    def _outline_half_extent(self) -> tuple[float, float]:
        if self.outline in ("hexagon", "circle"):
            if self.rings is not None:
                r = (self.rings + 0.5) * self.pitch_um
                return r, r
            return self.diameter_um / 2.0, self.diameter_um / 2.0
        if self.rows is not None:
            return self.cols * self.pitch_um / 2.0, self.rows * self.pitch_um / 2.0
        h = self.height_um if self.outline == "rectangle" else self.width_um
        return self.width_um / 2.0, h / 2.0

    def _inside_outline(self, xy: np.ndarray) -> np.ndarray:
        tol = 1e-9 * self.pitch_um
        x, y = xy[..., 0], xy[..., 1]
        if self.outline == "circle":
            return np.hypot(x, y) <= self.diameter_um / 2.0 + tol
        if self.outline == "hexagon":
            radius = self.diameter_um / 2.0
            apothem = radius * SQRT3 / 2.0
            ang = np.deg2rad([30.0, 90.0, 150.0])
            g = np.max(np.abs(x[..., None] * np.cos(ang) + y[..., None] * np.sin(ang)), axis=-1)
            return g <= apothem + tol
        hw, hh = self._outline_half_extent()
        return (np.abs(x) <= hw + tol) & (np.abs(y) <= hh + tol)

    @cached_property
    def _lattice(self) -> tuple[np.ndarray, np.ndarray]:
        """Sorted centres (n, 2) in the array frame and their lattice rows."""
        p = self.pitch_um
        dy = p * SQRT3 / 2.0 if self.layout == "hex" else p
        shift_odd = 0.5 if self.layout == "hex" else 0.0
        if self.rows is not None:
            j, i = np.meshgrid(np.arange(self.rows), np.arange(self.cols), indexing="ij")
            x = p * (i + shift_odd * (j % 2))
            y = dy * j
            x = x - 0.5 * (x.min() + x.max())
            y = y - 0.5 * (y.min() + y.max())
            keep = np.ones(x.shape, dtype=bool)
        else:
            radius = None if self.rings is None else (self.rings + 0.5) * p
            hw, hh = self._outline_half_extent()
            nj = int(math.ceil(hh / dy)) + 1
            ni = int(math.ceil(hw / p)) + 1
            j, i = np.meshgrid(np.arange(-nj, nj + 1), np.arange(-ni, ni + 1), indexing="ij")
            x = p * (i + shift_odd * (j % 2))
            y = dy * j
            pts = np.stack([x, y], axis=-1)
            if radius is not None:
                keep = self._inside_hexagon_rings(pts, radius)
            elif self.pixel_inclusion == "center":
                keep = self._inside_outline(pts)
            else:
                verts = self.polygon_local_um("cell")
                keep = np.ones(x.shape, dtype=bool)
                for vx, vy in verts:
                    keep &= self._inside_outline(pts + np.array([vx, vy]))
        x, y, j = x[keep], y[keep], j[keep]
        order = np.lexsort((x, -j))
        centres = np.stack([x[order], y[order]], axis=1)
        centres.setflags(write=False)
        rows = j[order]
        rows.setflags(write=False)
        return centres, rows

    def _inside_hexagon_rings(self, pts: np.ndarray, radius: float) -> np.ndarray:
        apothem = radius * SQRT3 / 2.0
        ang = np.deg2rad([30.0, 90.0, 150.0])
        g = np.max(
            np.abs(pts[..., 0, None] * np.cos(ang) + pts[..., 1, None] * np.sin(ang)), axis=-1
        )
        return g <= apothem + 1e-9 * self.pitch_um

    # -- pixels ----------------------------------------------------------------------
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

    @property
    def center_x_um_array(self) -> np.ndarray:
        """x of each pixel centre on the retina, µm."""
        return self.centers_um[:, 0]

    @property
    def center_y_um_array(self) -> np.ndarray:
        """y of each pixel centre on the retina, µm."""
        return self.centers_um[:, 1]

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

    # -- acuity --------------------------------------------------------------------
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

    # -- placement checks ------------------------------------------------------------
    def fits_in(self, grid: RetinalGrid) -> bool:
        """Whether every pixel cell lies inside the grid's field."""
        x0, x1, y0, y1 = grid.extent_um
        e = self.footprint_extent_um
        tol = 1e-9 * max(grid.width_um, grid.height_um)
        return e[0] >= x0 - tol and e[1] <= x1 + tol and e[2] >= y0 - tol and e[3] <= y1 + tol

    def check_fits(self, grid: RetinalGrid, field: str = "implant") -> None:
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

    # -- rasterising and readout -------------------------------------------------------
    def rasterize(
        self, grid: RetinalGrid, region: str = "active", *, check_fit: bool = True
    ) -> ImplantRaster:
        """Area-weighted coverage of the grid's samples by each pixel.

        Parameters
        ----------
        grid : RetinalGrid
        region : {"active", "cell"}
            Photodiodes only, or whole cells (the array's footprint).
        check_fit : bool
            Raise :class:`ConfigError` when the array leaves the field; with
            False, the part outside is cut off.

        Returns
        -------
        ImplantRaster

        Notes
        -----
        Exact: every polygon or disc is intersected analytically with every
        sample square it touches. Results are cached per (implant, grid,
        region).
        """
        if not isinstance(grid, RetinalGrid):
            raise ConfigError("grid", grid, "a RetinalGrid")
        region = validate.choice("region", region, REGIONS)
        if validate.boolean("check_fit", check_fit):
            self.check_fits(grid)
        return rasterize_cached(self, grid, region)

    def readout(
        self,
        irradiance_mw_per_mm2: np.ndarray,
        grid: RetinalGrid,
        *,
        responsivity_a_per_w: float | None = None,
        wavelength_nm: float = 880.0,
    ) -> PixelReadout:
        """Integrate an irradiance map over each pixel's photodiode.

        Parameters
        ----------
        irradiance_mw_per_mm2 : ndarray, shape grid.shape
            Retinal irradiance, mW/mm², >= 0.
        grid : RetinalGrid
            The grid of the map; the implant must fit inside it.
        responsivity_a_per_w : float, optional
            Photodiode responsivity, A/W, in (0, 2]. By default the silicon
            limit at ``wavelength_nm`` (:func:`silicon_responsivity_limit_a_per_w`),
            an upper bound.
        wavelength_nm : float
            Used only for the default responsivity.

        Returns
        -------
        PixelReadout
        """
        if not isinstance(grid, RetinalGrid):
            raise ConfigError("grid", grid, "a RetinalGrid")
        raw = np.asarray(irradiance_mw_per_mm2)
        keep = np.float64 if raw.dtype == np.float64 else np.float32  # no precision lost
        irr = validate.finite_array(
            "irradiance_mw_per_mm2", raw, shape=grid.shape, lo=0.0, dtype=keep
        )
        if responsivity_a_per_w is None:
            resp = silicon_responsivity_limit_a_per_w(wavelength_nm)
        else:
            resp = validate.number(
                "responsivity_a_per_w", responsivity_a_per_w, lo=0, hi=2.0, lo_open=True
            )
        raster = self.rasterize(grid, "active")
        m = raster.matrix
        flat = np.ascontiguousarray(irr).reshape(-1)
        sample_mm2 = grid.sample_area_mm2
        area_mm2 = raster.row_sums * sample_mm2
        sums, lo, hi = pixel_sums(m.indptr, m.indices, m.data, flat)
        power_mw = sums * sample_mm2
        with np.errstate(divide="ignore", invalid="ignore"):
            mean = np.where(area_mm2 > 0, power_mw / np.where(area_mm2 > 0, area_mm2, 1.0), 0.0)
        c = self.centers_um
        return PixelReadout(
            pixel=np.arange(self.n_pixels),
            center_x_um=c[:, 0].copy(),
            center_y_um=c[:, 1].copy(),
            active_area_mm2=area_mm2,
            power_uw=power_mw * 1e3,
            mean_irradiance_mw_per_mm2=mean,
            min_irradiance_mw_per_mm2=lo,
            max_irradiance_mw_per_mm2=hi,
            photocurrent_ua=resp * power_mw * 1e3,
            responsivity_a_per_w=resp,
        )

    def to_dict(self) -> dict[str, Any]:
        """Field values, unset ones left out (``Implant(**d)`` rebuilds the implant)."""
        out = {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}
        return {k: val for k, val in out.items() if val is not None}

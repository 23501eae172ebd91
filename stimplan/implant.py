"""Photovoltaic implant arrays: layout, rasterising and per-pixel readout.

An :class:`Implant` is a hexagonal or square lattice of pixels of a given
pitch, cut to an outline (hexagon, circle, square or rectangle), placed on
the retina with a centre offset and a rotation. Each pixel has an active
photodiode (hexagon, circle or square) inside its cell, separated from its
neighbours by a trench.

Array frame
    Before placement the array is centred on the origin. Hexagonal lattices
    have horizontal rows (neighbours at 0°, 60°, 120°, ...), row spacing
    ``pitch × √3/2``, odd rows shifted by half a pitch; their cells are
    regular hexagons with vertical flat sides, ``pitch`` across the flats.
    Square lattices have square cells of side ``pitch``.
Numbering
    Pixels are numbered ``0 .. n-1`` from the top row down and, within a row,
    from left to right, in the array frame; moving or rotating the array does
    not renumber it.
Membership
    With ``pixel_inclusion="center"`` a lattice pixel belongs to the array
    when its centre lies inside the outline; with ``"cell"`` when its whole
    cell does. The hexagonal outline has corners left and right (along x),
    ``diameter_um`` corner to corner; ``rings=k`` selects the centred
    hexagonal patch of ``3k(k+1)+1`` pixels (corner to corner
    ``(2k+1) × pitch`` with centre inclusion).
Rasterising
    The coverage of every grid sample by every active area is computed
    exactly (analytic intersection of each polygon or disc with each sample
    square, see :func:`polygon_quadrant_area` and :func:`disc_quadrant_area`),
    so the rasterised area equals the geometric area up to rounding.

References
----------
.. [1] K. Mathieson et al., "Photovoltaic retinal prosthesis with high pixel
   density", *Nat. Photonics* 6, 391 (2012).
.. [2] D. Palanker et al., "Photovoltaic restoration of central vision in
   atrophic age-related macular degeneration", *Ophthalmology* 127, 1097
   (2020).
.. [3] H. Lorach et al., *Nat. Med.* 21, 476 (2015) (grating acuity and
   pixel pitch).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from functools import cached_property, lru_cache
from typing import Any, Literal

import numba as nb
import numpy as np
import scipy.sparse as sp

from . import validate
from .acuity import GratingAcuity, nyquist_acuity
from .errors import ConfigError
from .grid import RetinalGrid
from .system import Eye

__all__ = [
    "Implant",
    "ImplantRaster",
    "PixelReadout",
    "IMPLANT_PRESETS",
    "implant_preset",
    "implant_names",
    "silicon_responsivity_limit_a_per_w",
    "centred_hexagonal_number",
    "polygon_quadrant_area",
    "disc_quadrant_area",
]

LAYOUTS = ("hex", "square")
OUTLINES = ("hexagon", "circle", "square", "rectangle")
ACTIVE_SHAPES = ("hexagon", "circle", "square")
INCLUSIONS = ("center", "cell")
REGIONS = ("active", "cell")

_SQRT3 = math.sqrt(3.0)
#: Largest number of lattice pixels an implant may have.
MAX_IMPLANT_PIXELS = 200_000
#: Entries of the temporary corner arrays computed at once while rasterising.
_CHUNK_ELEMENTS = 2_000_000


# -- small pure functions ----------------------------------------------------


def centred_hexagonal_number(rings: int) -> int:
    """Number of pixels in a centred hexagonal patch with ``rings`` rings, ``3k(k+1)+1``."""
    k = validate.integer("rings", rings, lo=0)
    return 3 * k * (k + 1) + 1


def silicon_responsivity_limit_a_per_w(wavelength_nm: float) -> float:
    """Upper limit of a silicon photodiode's responsivity, A/W.

    One electron per photon: ``R = e λ / (h c) = λ[µm] / 1.23984`` A/W.
    Real photodiodes reach less (reflection, incomplete collection); the
    limit holds only below the band-gap wavelength (about 1100 nm).

    Parameters
    ----------
    wavelength_nm : float
        Wavelength in nm, in (200, 1100].

    Returns
    -------
    float

    References
    ----------
    .. [1] Photon energy ``E = h c / λ``, ``h c / e = 1.23984 eV µm``
       (CODATA 2018 values of h, c and e).
    """
    lam = validate.number("wavelength_nm", wavelength_nm, lo=200.0, hi=1100.0, lo_open=True)
    from scipy.constants import c, e, h

    return lam * 1e-9 * e / (h * c)


def polygon_quadrant_area(
    vertices_um: np.ndarray, x_um: np.ndarray, y_um: np.ndarray
) -> np.ndarray:
    """Area of a polygon inside the quadrant ``{x <= X, y <= Y}``.

    Green's theorem gives ``area(P ∩ Q) = ∮_∂P min(x, X) d min(y, Y)``; on each
    edge both clamped coordinates are piecewise linear with breaks where the
    edge crosses ``x = X`` or ``y = Y``, so the trapezoid rule on the pieces is
    exact.

    Parameters
    ----------
    vertices_um : ndarray, shape (V, 2)
        Vertices ``(x, y)``, counter-clockwise (simple polygon).
    x_um, y_um : ndarray
        Corner coordinates ``X`` and ``Y``; broadcast against each other.

    Returns
    -------
    ndarray
        Areas, float64, of the broadcast shape.

    References
    ----------
    .. [1] Green's theorem, ``∬ ∂N/∂x dA = ∮ N dy`` with
       ``N = min(x, X) [y <= Y]``.
    """
    vert = np.asarray(vertices_um, dtype=np.float64)
    xa, ya = vert[:, 0], vert[:, 1]
    xb, yb = np.roll(xa, -1), np.roll(ya, -1)
    dx, dy = xb - xa, yb - ya
    X = np.asarray(x_um, dtype=np.float64)[..., np.newaxis]
    Y = np.asarray(y_um, dtype=np.float64)[..., np.newaxis]
    safe_dx = np.where(dx == 0, 1.0, dx)
    safe_dy = np.where(dy == 0, 1.0, dy)
    tx = np.where(dx == 0, 0.0, np.clip((X - xa) / safe_dx, 0.0, 1.0))
    ty = np.where(dy == 0, 0.0, np.clip((Y - ya) / safe_dy, 0.0, 1.0))
    t1 = np.minimum(tx, ty)
    t2 = np.maximum(tx, ty)
    total = 0.0
    prev_u = np.minimum(xa, X)
    prev_w = np.minimum(ya, Y)
    for t in (t1, t2, None):
        if t is None:
            u = np.minimum(xb, X)
            w = np.minimum(yb, Y)
        else:
            u = np.minimum(xa + t * dx, X)
            w = np.minimum(ya + t * dy, Y)
        total = total + 0.5 * (prev_u + u) * (w - prev_w)
        prev_u, prev_w = u, w
    return np.sum(total, axis=-1)


@nb.njit(parallel=True, cache=True, nogil=True)
def _polygon_quadrant_grid(vert, xr, yr):  # pragma: no cover - compiled
    """:func:`polygon_quadrant_area` of one polygon at the corners ``(xr[p, j], yr[p, i])``
    of each pixel ``p``'s sample grid: ``out[p, i, j]`` (float64), in one pass."""
    m, ncx = xr.shape
    ncy = yr.shape[1]
    nv = vert.shape[0]
    out = np.empty((m, ncy, ncx))
    for p in nb.prange(m):
        for i in range(ncy):
            Y = yr[p, i]
            for j in range(ncx):
                X = xr[p, j]
                total = 0.0
                for e in range(nv):
                    xa, ya = vert[e, 0], vert[e, 1]
                    xb, yb = vert[(e + 1) % nv, 0], vert[(e + 1) % nv, 1]
                    dx, dy = xb - xa, yb - ya
                    tx = 0.0 if dx == 0 else min(max((X - xa) / dx, 0.0), 1.0)
                    ty = 0.0 if dy == 0 else min(max((Y - ya) / dy, 0.0), 1.0)
                    t1, t2 = min(tx, ty), max(tx, ty)
                    pu, pw = min(xa, X), min(ya, Y)
                    u, w = min(xa + t1 * dx, X), min(ya + t1 * dy, Y)
                    total += 0.5 * (pu + u) * (w - pw)
                    pu, pw = u, w
                    u, w = min(xa + t2 * dx, X), min(ya + t2 * dy, Y)
                    total += 0.5 * (pu + u) * (w - pw)
                    pu, pw = u, w
                    u, w = min(xb, X), min(yb, Y)
                    total += 0.5 * (pu + u) * (w - pw)
                out[p, i, j] = total
    return out


def _segment_area(a: np.ndarray, r: float) -> np.ndarray:
    """Area of the disc of radius ``r`` (centre 0) with ``x >= a``."""
    a = np.clip(a, -r, r)
    return r * r * np.arccos(a / r) - a * np.sqrt(np.maximum(r * r - a * a, 0.0))


def _corner_area(a: np.ndarray, b: np.ndarray, r: float) -> np.ndarray:
    """Area of the disc with ``x >= a, y >= b`` for ``a, b >= 0``."""
    a = np.minimum(a, r)
    b = np.minimum(b, r)
    y1 = np.sqrt(np.maximum(r * r - a * a, 0.0))
    y0 = np.minimum(b, y1)

    def prim(y: np.ndarray) -> np.ndarray:  # ∫ sqrt(r² - y²) dy
        return 0.5 * (y * np.sqrt(np.maximum(r * r - y * y, 0.0)) + r * r * np.arcsin(y / r))

    return np.maximum(prim(y1) - prim(y0) - a * (y1 - y0), 0.0)


def disc_quadrant_area(radius_um: float, x_um: np.ndarray, y_um: np.ndarray) -> np.ndarray:
    """Area of a disc centred on the origin inside the quadrant ``{x <= X, y <= Y}``.

    Closed form from the circular segment ``r² acos(a/r) - a sqrt(r² - a²)``
    and the integral of the circle ``∫ sqrt(r² - y²) dy``, by inclusion and
    exclusion over the four quadrant signs.

    Parameters
    ----------
    radius_um : float
        Disc radius, > 0.
    x_um, y_um : ndarray
        Corner coordinates; broadcast against each other.

    Returns
    -------
    ndarray
        Areas, float64.
    """
    r = float(radius_um)
    X = np.asarray(x_um, dtype=np.float64)
    Y = np.asarray(y_um, dtype=np.float64)
    hx = _segment_area(X, r)  # area with x >= X
    hy = _segment_area(Y, r)
    hmx = _segment_area(-X, r)
    q = _corner_area(np.abs(X), np.abs(Y), r)
    # upper-right area U(X, Y) = area with x >= X and y >= Y, for every sign.
    xn, yn = X < 0, Y < 0
    upper = np.where(
        xn & yn,
        hy - hmx + q,
        np.where(xn, hy - q, np.where(yn, hx - q, q)),
    )
    return math.pi * r * r - hx - hy + upper


def _regular_polygon(n: int, circumradius: float, start_deg: float) -> np.ndarray:
    ang = np.deg2rad(start_deg + 360.0 / n * np.arange(n))
    return np.stack([circumradius * np.cos(ang), circumradius * np.sin(ang)], axis=1)


def _rotate(xy: np.ndarray, deg: float) -> np.ndarray:
    c, s = math.cos(math.radians(deg)), math.sin(math.radians(deg))
    out = np.empty_like(xy, dtype=np.float64)
    out[..., 0] = c * xy[..., 0] - s * xy[..., 1]
    out[..., 1] = s * xy[..., 0] + c * xy[..., 1]
    return out


# -- results -----------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class ImplantRaster:
    """Coverage of grid samples by implant pixels.

    Attributes
    ----------
    matrix : scipy.sparse.csr_matrix, shape (n_pixels, rows * cols)
        ``matrix[i, k]`` is the fraction (0..1) of flat sample ``k``
        (``row * cols + col``) covered by pixel ``i``; float64.
    grid : RetinalGrid
        The grid.
    region : {"active", "cell"}
        Active photodiode areas or whole pixel cells.
    """

    matrix: sp.csr_matrix
    grid: RetinalGrid
    region: str

    @property
    def n_pixels(self) -> int:
        return self.matrix.shape[0]

    def pixel_samples(self, index: int) -> tuple[np.ndarray, np.ndarray]:
        """``(flat sample indices, coverage fractions)`` of pixel ``index``."""
        i = validate.integer("pixel", index, lo=0, hi=self.n_pixels - 1)
        a, b = self.matrix.indptr[i], self.matrix.indptr[i + 1]
        return self.matrix.indices[a:b], self.matrix.data[a:b]

    @cached_property
    def row_sums(self) -> np.ndarray:
        """Covered samples of each pixel (sum of its coverage fractions), float64."""
        return np.asarray(self.matrix.sum(axis=1)).ravel()

    def area_um2(self) -> np.ndarray:
        """Rasterised area of each pixel's region, µm² (float64, shape (n,))."""
        return self.row_sums * self.grid.sample_area_um2

    def coverage_image(self) -> np.ndarray:
        """Fraction of each sample covered by any pixel, float32 (rows, cols) in [0, 1]."""
        cov = np.bincount(
            self.matrix.indices, weights=self.matrix.data, minlength=self.grid.rows * self.grid.cols
        )
        return np.clip(cov, 0.0, 1.0).astype(np.float32).reshape(self.grid.shape)

    def label_image(self, threshold: float = 0.5) -> np.ndarray:
        """Pixel number of each sample, int32 (rows, cols); -1 outside every pixel.

        A sample gets the number of the pixel that covers most of it, if that
        pixel covers at least ``threshold`` of it.
        """
        thr = validate.number("threshold", threshold, lo=0, hi=1, lo_open=True)
        m = self.matrix.tocoo()
        keep = m.data >= thr
        rows, cols, data = m.row[keep], m.col[keep], m.data[keep]
        order = np.lexsort((data, cols))
        cols_sorted = cols[order]
        last = np.r_[cols_sorted[1:] != cols_sorted[:-1], True]
        labels = np.full(self.grid.rows * self.grid.cols, -1, dtype=np.int32)
        labels[cols_sorted[last]] = rows[order][last].astype(np.int32)
        return labels.reshape(self.grid.shape)


@dataclass(frozen=True, eq=False)
class PixelReadout:
    """Light received by each implant pixel.

    Attributes
    ----------
    pixel : ndarray of int
        Pixel numbers ``0 .. n-1``.
    center_x_um, center_y_um : ndarray
        Pixel centres on the retina, µm.
    active_area_mm2 : ndarray
        Rasterised active area, mm².
    power_uw : ndarray
        Optical power on the active area, µW (irradiance × coverage × sample
        area, summed).
    mean_irradiance_mw_per_mm2 : ndarray
        ``power / active area``.
    min_irradiance_mw_per_mm2, max_irradiance_mw_per_mm2 : ndarray
        Extremes of the irradiance over the samples that the active area
        covers by more than half (by the most-covered sample when none is).
    photocurrent_ua : ndarray
        ``responsivity × power``, µA (photodiode current before any
        electrode or tissue model).
    responsivity_a_per_w : float
        The responsivity used.
    """

    pixel: np.ndarray
    center_x_um: np.ndarray
    center_y_um: np.ndarray
    active_area_mm2: np.ndarray
    power_uw: np.ndarray
    mean_irradiance_mw_per_mm2: np.ndarray
    min_irradiance_mw_per_mm2: np.ndarray
    max_irradiance_mw_per_mm2: np.ndarray
    photocurrent_ua: np.ndarray
    responsivity_a_per_w: float

    @property
    def n_pixels(self) -> int:
        return int(self.pixel.size)

    def to_dict(self) -> dict[str, Any]:
        """Columns as lists (for JSON/CSV writers)."""
        out: dict[str, Any] = {}
        for f in dataclasses.fields(self):
            val = getattr(self, f.name)
            out[f.name] = val.tolist() if isinstance(val, np.ndarray) else val
        return out


# -- the implant ---------------------------------------------------------------


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
        return _SQRT3 / 2.0 * p * p if self.layout == "hex" else p * p

    @property
    def active_size_um(self) -> float:
        """Photodiode size, µm: circle diameter, hexagon flat-to-flat, or square side."""
        if self.active_diameter_um is not None:
            return self.active_diameter_um
        area = self.active_fraction * self.cell_area_um2
        if self.active_shape == "circle":
            return 2.0 * math.sqrt(area / math.pi)
        if self.active_shape == "hexagon":
            return math.sqrt(area / (_SQRT3 / 2.0))
        return math.sqrt(area)

    @property
    def active_area_um2(self) -> float:
        """Geometric photodiode area of one pixel, µm²."""
        s = self.active_size_um
        if self.active_shape == "circle":
            return math.pi * s * s / 4.0
        if self.active_shape == "hexagon":
            return _SQRT3 / 2.0 * s * s
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
        verts = self._polygon_local("active")
        return np.max(normals @ verts.T, axis=1)

    def _polygon_local(self, region: str) -> np.ndarray:
        """Vertices (V, 2) of the region's polygon in the array frame, counter-clockwise."""
        if region == "cell":
            if self.layout == "hex":
                return _regular_polygon(6, self.pitch_um / _SQRT3, 30.0)
            h = self.pitch_um / 2.0
            return np.array([[h, h], [-h, h], [-h, -h], [h, -h]])
        s = self.active_size_um
        if self.active_shape == "hexagon":
            return _regular_polygon(6, s / _SQRT3, 30.0)
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
            apothem = radius * _SQRT3 / 2.0
            ang = np.deg2rad([30.0, 90.0, 150.0])
            g = np.max(np.abs(x[..., None] * np.cos(ang) + y[..., None] * np.sin(ang)), axis=-1)
            return g <= apothem + tol
        hw, hh = self._outline_half_extent()
        return (np.abs(x) <= hw + tol) & (np.abs(y) <= hh + tol)

    @cached_property
    def _lattice(self) -> tuple[np.ndarray, np.ndarray]:
        """Sorted centres (n, 2) in the array frame and their lattice rows."""
        p = self.pitch_um
        dy = p * _SQRT3 / 2.0 if self.layout == "hex" else p
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
                verts = self._polygon_local("cell")
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
        apothem = radius * _SQRT3 / 2.0
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
        xy = _rotate(self._lattice[0], self.rotation_deg)
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
            verts = _regular_polygon(nv, self.active_size_um / 2.0, 0.0)
        else:
            verts = _rotate(self._polygon_local(region), self.rotation_deg)
        return self.centers_um[:, None, :] + verts[None, :, :]

    @cached_property
    def footprint_extent_um(self) -> tuple[float, float, float, float]:
        """``(x_min, x_max, y_min, y_max)`` on the retina of all pixel cells, µm."""
        verts = _rotate(self._polygon_local("cell"), self.rotation_deg)
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
        return _rasterize_cached(self, grid, region)

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
        sums, lo, hi = _pixel_sums(m.indptr, m.indices, m.data, flat)
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


@nb.njit(cache=True, nogil=True)
def _pixel_sums(indptr, indices, data, flat):  # pragma: no cover - compiled
    """Per row of a CSR coverage matrix: ``sum(data * flat[indices])`` (float64, in CSR
    order), and the min and max of ``flat`` over the samples with coverage > 0.5 (the
    most-covered sample if none is)."""
    n = indptr.size - 1
    sums = np.zeros(n)
    lo = np.zeros(n)
    hi = np.zeros(n)
    for i in range(n):
        acc = 0.0
        mn = np.inf
        mx = -np.inf
        best_w = -1.0
        best_x = 0.0
        for k in range(indptr[i], indptr[i + 1]):
            x = np.float64(flat[indices[k]])
            w = data[k]
            acc += w * x
            if w > 0.5:
                mn = min(mn, x)
                mx = max(mx, x)
            if w > best_w:
                best_w = w
                best_x = x
        sums[i] = acc
        if mx >= mn:
            lo[i] = mn
            hi[i] = mx
        elif indptr[i + 1] > indptr[i]:
            lo[i] = hi[i] = best_x
    return sums, lo, hi


@lru_cache(maxsize=16)
def _rasterize_cached(implant: Implant, grid: RetinalGrid, region: str) -> ImplantRaster:
    return ImplantRaster(_coverage_matrix(implant, grid, region), grid, region)


def _coverage_matrix(implant: Implant, grid: RetinalGrid, region: str) -> sp.csr_matrix:
    disc = region == "active" and implant.active_shape == "circle"
    if disc:
        radius = implant.active_size_um / 2.0
        xmin, xmax, ymin, ymax = -radius, radius, -radius, radius
        verts = None
    else:
        verts = _rotate(implant._polygon_local(region), implant.rotation_deg)
        xmin, xmax = verts[:, 0].min(), verts[:, 0].max()
        ymin, ymax = verts[:, 1].min(), verts[:, 1].max()
    px, py = grid.pitch_x_um, grid.pitch_y_um
    ex0 = grid.x_um[0] - px / 2.0  # left edge of column 0
    ey0 = grid.y_um[0] + py / 2.0  # top edge of row 0
    nc = int(math.ceil((xmax - xmin) / px)) + 1
    nr = int(math.ceil((ymax - ymin) / py)) + 1
    centres = implant.centers_um
    n = centres.shape[0]
    cx, cy = centres[:, 0], centres[:, 1]
    c_start = np.floor((cx + xmin - ex0) / px).astype(np.int64)
    r_start = np.floor((ey0 - (cy + ymax)) / py).astype(np.int64)
    per_pixel = (nr + 1) * (nc + 1) * (1 if disc else len(verts))
    chunk = max(1, _CHUNK_ELEMENTS // per_pixel)
    kc, kr = np.arange(nc + 1), np.arange(nr + 1)
    data_parts, index_parts, counts = [], [], np.zeros(n, dtype=np.int64)
    rows_total, cols_total = grid.shape
    for a in range(0, n, chunk):
        b = min(n, a + chunk)
        xr = ex0 + (c_start[a:b, None] + kc) * px - cx[a:b, None]  # (m, nc+1)
        yr = ey0 - (r_start[a:b, None] + kr) * py - cy[a:b, None]  # (m, nr+1)
        if disc:
            F = disc_quadrant_area(radius, xr[:, None, :], yr[:, :, None])
        else:
            F = _polygon_quadrant_grid(
                np.ascontiguousarray(verts, np.float64),
                np.ascontiguousarray(xr, np.float64),
                np.ascontiguousarray(yr, np.float64),
            )
        area = (F[:, :-1, 1:] - F[:, :-1, :-1]) - (F[:, 1:, 1:] - F[:, 1:, :-1])
        cov = np.clip(area / (px * py), 0.0, 1.0)
        ri = r_start[a:b, None] + kr[:-1]  # (m, nr)
        ci = c_start[a:b, None] + kc[:-1]  # (m, nc)
        ok = (
            (cov > 1e-9)
            & ((ri >= 0) & (ri < rows_total))[:, :, None]
            & ((ci >= 0) & (ci < cols_total))[:, None, :]
        )
        flat_idx = ri[:, :, None] * cols_total + ci[:, None, :]
        data_parts.append(cov[ok])
        index_parts.append(flat_idx[ok])
        counts[a:b] = ok.reshape(b - a, -1).sum(axis=1)
    indptr = np.concatenate([[0], np.cumsum(counts)])
    data = np.concatenate(data_parts) if data_parts else np.zeros(0)
    indices = np.concatenate(index_parts) if index_parts else np.zeros(0, dtype=np.int64)
    size = rows_total * cols_total
    idx_dtype = np.int32 if size < 2**31 else np.int64
    return sp.csr_matrix(
        (data, indices.astype(idx_dtype), indptr.astype(idx_dtype)), shape=(n, size)
    )


# -- presets -------------------------------------------------------------------------

IMPLANT_PRESETS: dict[str, dict[str, Any]] = {
    # Demo: a rat array about 1.2 mm across (11 rings: 397 pixels, 1265 µm corner to
    # corner) of 55 µm hexagonal pixels; 60 % active area and a 5 µm trench are demo
    # values. Pixel pitches of 100 to 20 µm have been built (Mathieson 2012; Ho 2019).
    "rat_55um": dict(
        pitch_um=55.0,
        layout="hex",
        outline="hexagon",
        rings=11,
        active_shape="hexagon",
        active_fraction=0.6,
        trench_um=5.0,
        name="rat_55um",
    ),
    # A 2 × 2 mm array of 100 µm hexagonal pixels (the clinical device of Palanker
    # et al. 2020 has 378 pixels; here every cell that fits in the 2 mm square is
    # kept, which gives more). Active fraction and trench are demo values.
    "human_100um": dict(
        pitch_um=100.0,
        layout="hex",
        outline="square",
        width_um=2000.0,
        pixel_inclusion="cell",
        active_shape="hexagon",
        active_fraction=0.6,
        trench_um=5.0,
        name="human_100um",
    ),
}


def implant_names() -> tuple[str, ...]:
    """Names of the implant presets."""
    return tuple(IMPLANT_PRESETS)


def implant_preset(name: str, **overrides: Any) -> Implant:
    """An implant preset, optionally with some fields replaced.

    Parameters
    ----------
    name : {"rat_55um", "human_100um"}
        The preset.
    **overrides
        Any :class:`Implant` field, e.g. ``center_x_um=200.0``. Size fields
        replace the preset's sizing (``rings`` replaces ``diameter_um`` and
        vice versa); likewise ``active_diameter_um`` replaces
        ``active_fraction``.

    Returns
    -------
    Implant
    """
    if name not in IMPLANT_PRESETS:
        raise ConfigError(
            "implant.preset", name, "one of " + ", ".join(repr(n) for n in IMPLANT_PRESETS)
        )
    known = {f.name for f in dataclasses.fields(Implant)}
    for k in overrides:
        if k not in known:
            raise ConfigError(f"implant.{k}", overrides[k], "a field of Implant")
    params = dict(IMPLANT_PRESETS[name])
    size_keys = {"diameter_um", "width_um", "height_um", "rows", "cols", "rings"}
    if size_keys & set(overrides):
        for k in size_keys:
            params.pop(k, None)
    if "active_diameter_um" in overrides:
        params.pop("active_fraction", None)
    if "active_fraction" in overrides:
        params.pop("active_diameter_um", None)
    params.update(overrides)
    return Implant(**params)

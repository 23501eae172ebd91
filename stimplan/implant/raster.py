"""An implant rasterised onto a retinal grid (sparse coverage) and its per-pixel readout."""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from functools import cached_property, lru_cache
from typing import Any

import numba as nb
import numpy as np
import scipy.sparse

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid
from .checks import REGIONS
from .geometry import (
    disc_quadrant_area,
    polygon_quadrant_grid,
    rotate_um,
)
from .photodiode import pixel_photocurrent_ua, pixel_responsivity

__all__ = [
    "rasterize",
    "pixel_readout",
    "CHUNK_ELEMENTS",
    "ImplantRaster",
    "PixelReadout",
    "pixel_sums",
    "rasterize_cached",
]


#: Entries of the temporary corner arrays computed at once while rasterising.
CHUNK_ELEMENTS = 2_000_000


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

    matrix: scipy.sparse.csr_matrix
    grid: RetinalGrid
    region: str

    @property
    def n_pixels(self) -> int:
        return self.matrix.shape[0]

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
        ``responsivity × power / diodes_in_series``, µA: the pixel's photodiode
        current before any electrode or tissue model
        (:mod:`stimplan.implant.photodiode`).
    responsivity_a_per_w : float
        The responsivity used.
    diodes_in_series : int
        Photodiodes in series per pixel.
    responsivity_is_limit : bool
        Whether the responsivity is the silicon limit (the current an upper bound).
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
    diodes_in_series: int = 1
    responsivity_is_limit: bool = False

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


@nb.njit(cache=True, nogil=True)
def pixel_sums(indptr, indices, data, flat):  # pragma: no cover - compiled
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
def rasterize_cached(implant: Any, grid: RetinalGrid, region: str) -> ImplantRaster:
    return ImplantRaster(_coverage_matrix(implant, grid, region), grid, region)


def _coverage_matrix(implant: Any, grid: RetinalGrid, region: str) -> scipy.sparse.csr_matrix:
    disc = region == "active" and implant.active_shape == "circle"
    if disc:
        radius = implant.active_size_um / 2.0
        xmin, xmax, ymin, ymax = -radius, radius, -radius, radius
        verts = None
    else:
        verts = rotate_um(implant.polygon_local_um(region), implant.rotation_deg)
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
    chunk = max(1, CHUNK_ELEMENTS // per_pixel)
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
            F = polygon_quadrant_grid(
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
    return scipy.sparse.csr_matrix(
        (data, indices.astype(idx_dtype), indptr.astype(idx_dtype)), shape=(n, size)
    )


def pixel_readout(
    implant: Any,
    irradiance_mw_per_mm2: np.ndarray,
    grid: RetinalGrid,
    *,
    responsivity_a_per_w: float | None = None,
    wavelength_nm: float = 880.0,
) -> PixelReadout:
    """Integrate an irradiance map over each pixel's photodiode of ``implant``.

    Parameters
    ----------
    irradiance_mw_per_mm2 : ndarray, shape grid.shape
        Retinal irradiance, mW/mm², >= 0.
    grid : RetinalGrid
        The grid of the map; the implant must fit inside it.
    responsivity_a_per_w : float, optional
        Photodiode responsivity, A/W, in (0, 0.9] and at most the silicon limit
        at ``wavelength_nm``. By default the implant's own
        (``implant.responsivity_a_per_w``) or, without one, the silicon limit
        at ``wavelength_nm``, an upper bound
        (:func:`~stimplan.implant.geometry.silicon_responsivity_limit_a_per_w`).
    wavelength_nm : float
        The illumination wavelength, nm, in (200, 1100].

    Notes
    -----
    The current divides by ``implant.diodes_in_series``
    (:func:`~stimplan.implant.photodiode.pixel_photocurrent_ua`).

    Returns
    -------
    PixelReadout
    """
    if not isinstance(grid, RetinalGrid):
        raise ConfigError("grid", grid, "a RetinalGrid")
    raw = np.asarray(irradiance_mw_per_mm2)
    keep = np.float64 if raw.dtype == np.float64 else np.float32  # no precision lost
    irr = validate.finite_array("irradiance_mw_per_mm2", raw, shape=grid.shape, lo=0.0, dtype=keep)
    if responsivity_a_per_w is None:
        given, field = implant.responsivity_a_per_w, "implant.responsivity_a_per_w"
    else:
        given, field = responsivity_a_per_w, "responsivity_a_per_w"
    resp, is_limit = pixel_responsivity(given, wavelength_nm, field=field)
    n_series = implant.diodes_in_series
    raster = implant.rasterize(grid, "active")
    m = raster.matrix
    flat = np.ascontiguousarray(irr).reshape(-1)
    sample_mm2 = grid.sample_area_mm2
    area_mm2 = raster.row_sums * sample_mm2
    sums, lo, hi = pixel_sums(m.indptr, m.indices, m.data, flat)
    power_mw = sums * sample_mm2
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = np.where(area_mm2 > 0, power_mw / np.where(area_mm2 > 0, area_mm2, 1.0), 0.0)
    c = implant.centers_um
    return PixelReadout(
        pixel=np.arange(implant.n_pixels),
        center_x_um=c[:, 0].copy(),
        center_y_um=c[:, 1].copy(),
        active_area_mm2=area_mm2,
        power_uw=power_mw * 1e3,
        mean_irradiance_mw_per_mm2=mean,
        min_irradiance_mw_per_mm2=lo,
        max_irradiance_mw_per_mm2=hi,
        photocurrent_ua=pixel_photocurrent_ua(
            power_mw * 1e3, responsivity_a_per_w=resp, diodes_in_series=n_series
        ),
        responsivity_a_per_w=resp,
        diodes_in_series=n_series,
        responsivity_is_limit=is_limit,
    )


def rasterize(
    implant: Any, grid: RetinalGrid, region: str = "active", *, check_fit: bool = True
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
        implant.check_fits(grid)
    return rasterize_cached(implant, grid, region)

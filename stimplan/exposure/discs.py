"""Power within acceptance discs on a predicted retina.

* :func:`disc_kernel` is the area-weighted disc: each sample holds the area of
  its cell inside the circle (the map is taken as uniform within a sample).
* exact sums at chosen centres are in :mod:`stimplan.exposure.disc_bound`
  (summed-area table, closed-form cut cells).
* :class:`DiscIntegrator` and :func:`disc_power_map` give the disc power at
  every sample centre by an FFT convolution; :func:`peak_location` finds its
  maximum (the centre of a plateau of tied values).

References
----------
.. [1] ICNIRP, Health Phys. 105, 271-295 (2013) (varying acceptance angle for
   extended sources).
"""

from __future__ import annotations

import math
from typing import Any

import numba as nb
import numpy as np
import scipy.fft as sfft

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid
from .disc_bound import cell_areas_um2
from .retina import HUMAN_EYE, EyeModel, retinal_image_diameter_um

__all__ = [
    "disc_kernel",
    "kernel_half",
    "DiscIntegrator",
    "point_area_mm2",
    "check_grid",
    "check_map",
    "disc_power_map",
    "max_disc_power",
    "peak_location",
]


def kernel_half(diameter_um: float, pitch_x_um: float, pitch_y_um: float, rows: int, cols: int):
    """Half-size ``(rows, cols)`` of the disc kernel on a grid of ``rows x cols`` samples.

    A disc wider than the map is cut to the map's size: from any centre on
    the map it already covers every sample.
    """
    r = diameter_um / 2.0
    return (
        min(int(math.ceil(r / pitch_y_um + 0.5)), rows - 1),
        min(int(math.ceil(r / pitch_x_um + 0.5)), cols - 1),
    )


def disc_kernel(
    diameter_um: float, px: float, py: float, max_half_rows: int, max_half_cols: int
) -> np.ndarray:
    """Area-weighted disc: each sample holds (area of its cell inside the disc) in mm^2.

    The areas are exact (closed form, :func:`stimplan.exposure.disc_bound.cell_areas_um2`).

    References
    ----------
    .. [1] IEC 60825-1:2014, Annex A: the power is averaged over the acceptance disc.
    """
    r = diameter_um / 2.0
    hy = min(int(math.ceil(r / py + 0.5)), max_half_rows)
    hx = min(int(math.ceil(r / px + 0.5)), max_half_cols)
    return (cell_areas_um2(r, px, py, hy, hx) * 1e-6).astype(np.float32)


def point_area_mm2(diameter_um: float) -> float:
    """Area of a disc of ``diameter_um``, mm^2."""
    return math.pi * (diameter_um * 1e-3) ** 2 / 4.0


#: Cells of disc kernels (float64 cell areas) kept across maps, at most (64 MB).
_KEPT_KERNEL_CELLS = 8_000_000
#: Kernels with more cells than this are transformed in float32 (their 2-norm is then
#: small beside their sum, so the added round-off stays far below the tolerances).
_SINGLE_KERNEL_CELLS = 10_000


class DiscIntegrator:
    """Disc power maps on one grid, zero-padded as much as each disc needs.

    The padded FFT shapes come in a few tiers (for the largest disc and for
    1/2, 1/4 and 1/8 of its radius), so a small disc is not convolved on the
    shape of the largest one; one spectrum of a map per tier
    (:meth:`spectrum`) serves every disc of that tier. The spectra of the disc
    kernels are cached per diameter until :meth:`forget`.
    """

    def __init__(self, grid: RetinalGrid, max_diameter_um: float):
        self.grid = grid
        hy, hx = self._kernel_half(max_diameter_um)
        self._tiers = sorted(
            {self._padded((hy + k - 1) // k, (hx + k - 1) // k) for k in (1, 2, 4, 8)}
        )
        self._kernels: dict[float, tuple[np.ndarray, tuple[int, int]]] = {}
        self._norms: dict[float, tuple[float, float]] = {}
        self._single: dict[float, bool] = {}
        # disc kernels themselves (cell areas), kept across maps up to a number of cells
        self._kernel_cells: dict[float, np.ndarray] = {}

    def _kernel_half(self, diameter_um: float) -> tuple[int, int]:
        g = self.grid
        return kernel_half(diameter_um, g.pitch_x_um, g.pitch_y_um, g.rows, g.cols)

    def _padded(self, hy: int, hx: int) -> tuple[int, int]:
        rows, cols = self.grid.shape
        return (
            sfft.next_fast_len(rows + 2 * hy, real=True),
            sfft.next_fast_len(cols + 2 * hx, real=True),
        )

    def shape_for(self, diameter_um: float) -> tuple[int, int]:
        """The padded FFT shape a disc is convolved on (the smallest tier that holds it)."""
        need = self._padded(*self._kernel_half(diameter_um))
        for t in self._tiers:
            if t[0] >= need[0] and t[1] >= need[1]:
                return t
        self._tiers.append(need)
        return need

    def is_point(self, diameter_um: float) -> bool:
        """A disc that fits in one sample is integrated as a point (no FFT)."""
        return diameter_um <= min(self.grid.pitch_x_um, self.grid.pitch_y_um)

    def spectrum(self, irradiance: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
        """Spectrum of a map on a padded ``shape`` (:meth:`shape_for`), for :meth:`power_map_mw`."""
        return sfft.rfft2(irradiance, s=shape, workers=-1)

    def forget(self) -> None:
        """Drop the cached kernel spectra."""
        self._kernels.clear()

    def _kernel(self, diameter_um: float, *, double: bool = False) -> np.ndarray:
        """The disc's cell areas (mm^2): float32 as :func:`disc_kernel`, or, with
        ``double``, in float64 without that rounding."""
        k64 = self._kernel_cells.get(diameter_um)
        if k64 is None:
            g = self.grid
            hy, hx = self._kernel_half(diameter_um)
            k64 = cell_areas_um2(diameter_um / 2.0, g.pitch_x_um, g.pitch_y_um, hy, hx) * 1e-6
            if sum(k.size for k in self._kernel_cells.values()) + k64.size <= _KEPT_KERNEL_CELLS:
                self._kernel_cells[diameter_um] = k64
        kernel = k64.astype(np.float32)  # as disc_kernel
        if diameter_um not in self._norms:
            k = kernel.astype(np.float64)
            self._single[diameter_um] = kernel.size > _SINGLE_KERNEL_CELLS
            self._norms[diameter_um] = (float(k.sum()), float(np.sqrt(np.sum(k * k))))
        return k64 if double else kernel

    def _kernel_norms(self, diameter_um: float) -> tuple[float, float]:
        if diameter_um not in self._norms:
            self._kernel(diameter_um)
        return self._norms[diameter_um]

    def _transform(self, kernel: np.ndarray, diameter_um: float, shape) -> np.ndarray:
        # a large kernel is transformed in float32 (its round-off, relative to its
        # small 2-norm, is in error_bound_mw); a small one in float64, rounded once
        single = self._single[diameter_um]
        spec = sfft.rfft2(kernel if single else kernel.astype(np.float64), s=shape, workers=-1)
        return spec.astype(np.complex64, copy=False)

    def _kernel_spectrum(self, diameter_um: float, shape) -> tuple[np.ndarray, tuple[int, int]]:
        hit = self._kernels.get(diameter_um)
        if hit is None or hit[0].shape != (shape[0], shape[1] // 2 + 1):
            kernel = self._kernel(diameter_um)
            hit = (self._transform(kernel, diameter_um, shape), kernel.shape)
            self._kernels[diameter_um] = hit
        return hit

    def window_power_map_mw(
        self,
        irradiance: np.ndarray,
        diameter_um: float,
        rows: slice,
        cols: slice,
        spectra: dict | None = None,
    ) -> tuple[np.ndarray, bool]:
        """Disc powers (mW, float64) at the centres of samples ``[rows, cols]`` only,
        and whether they were computed in float64.

        The same convolution as :meth:`power_map_mw`, on the part of the map
        that discs centred in the box reach (the box grown by the kernel), so a
        small box costs a small transform; within the round-off bound of
        :meth:`error_bound_mw` (``double`` as returned), whose transform length
        it does not exceed; in float64 the cell areas are not rounded to float32,
        in float32 they are, as in :meth:`power_map_mw`. A transform of at
        most a quarter of the largest tier's size is done in float64 (its
        round-off is then negligible and few samples are left near the maximum to
        sum exactly); a larger one in float32. ``spectra`` keeps the map part's
        spectrum for other discs of the same box and transform shape.
        """
        g = self.grid
        if self.is_point(diameter_um):
            return irradiance[rows, cols] * point_area_mm2(diameter_um), True
        kernel = self._kernel(diameter_um, double=True)
        kh, kw = kernel.shape
        (r0, r1), (c0, c1) = (rows.start, rows.stop), (cols.start, cols.stop)
        w0, w1 = max(r0 + kh // 2 - kh + 1, 0), min(r1 + kh // 2, g.rows)
        v0, v1 = max(c0 + kw // 2 - kw + 1, 0), min(c1 + kw // 2, g.cols)
        shape = (
            min(sfft.next_fast_len(w1 - w0 + kh - 1, real=True), self.shape_for(diameter_um)[0]),
            min(sfft.next_fast_len(v1 - v0 + kw - 1, real=True), self.shape_for(diameter_um)[1]),
        )
        largest = self._tiers[-1]
        double = shape[0] * shape[1] * 4 <= largest[0] * largest[1]
        spectra = {} if spectra is None else spectra
        key = (w0, w1, v0, v1, shape, double)
        spectrum = spectra.get(key)
        if spectrum is None:
            spectra.clear()
            part = irradiance[w0:w1, v0:v1]
            part = part.astype(np.float64) if double else part
            spectrum = spectra[key] = sfft.rfft2(part, s=shape, workers=-1)
        if double:
            kspec = sfft.rfft2(kernel, s=shape, workers=-1)
        else:
            kspec = self._transform(kernel.astype(np.float32), diameter_um, shape)
        full = sfft.irfft2(spectrum * kspec, s=shape, workers=-1)
        a, b = r0 + kh // 2 - w0, c0 + kw // 2 - v0
        return np.array(full[a : a + (r1 - r0), b : b + (c1 - c0)], dtype=np.float64), double

    def error_bound_mw(
        self, map_l1: float, map_l2: float, diameter_um: float, *, double: bool = False
    ) -> float:
        """Bound of the float32 round-off of one value of :meth:`power_map_mw`.

        ``map_l1`` and ``map_l2`` are the 1- and 2-norms of the map. An FFT of
        ``n`` points has a relative 2-norm error of at most about
        ``eps = 5 log2(n) u`` [1]_ (``u = 2^-24``). With the map ``x`` and the
        kernel ``k``: the map's transform and the inverse transform each add at
        most ``eps |x|_2 |k|_1``, the product ``2 u |x|_2 |k|_1``, and the
        kernel's transform ``u |x|_1 |k|_2`` when it is done in float64 and
        rounded once, ``(eps + u) |x|_1 |k|_2`` when it is done in float32 (for
        kernels of more than :data:`_SINGLE_KERNEL_CELLS` cells; its spectrum's
        error, times the map's spectrum of largest value ``|x|_1``, then back);
        one value's error is at most the 2-norm of the error. A factor of 2 is
        added. With ``double`` (the float64 transforms of
        :meth:`window_power_map_mw`), ``u = 2^-53`` and the kernel's transform is
        in float64 too.

        References
        ----------
        .. [1] N. J. Higham, Accuracy and Stability of Numerical Algorithms,
           2nd ed., SIAM (2002), Thm. 24.2 (from memory).
        """
        if self.is_point(diameter_um):
            return 0.0
        shape = self.shape_for(diameter_um)  # the largest shape a disc is convolved on
        k1, k2 = self._kernel_norms(diameter_um)
        u = 2.0**-53 if double else 2.0**-24
        eps = 5.0 * math.log2(shape[0] * shape[1]) * u
        uk = (eps + u) if self._single[diameter_um] and not double else u
        return 2.0 * ((2.0 * eps + 2.0 * u) * map_l2 * k1 + uk * map_l1 * k2)

    def power_map_mw(
        self,
        irradiance: np.ndarray | None,
        diameter_um: float,
        spectra: dict | None = None,
    ) -> np.ndarray:
        """Disc power map (float32 on the grid) of a map.

        ``spectra`` (a dict, filled as needed) keeps the map's spectrum on the
        last padded shape used, so that discs of one tier, taken in a row,
        transform the map once (only one spectrum is held at a time). A disc
        that is a point needs only the map itself.
        """
        g = self.grid
        if self.is_point(diameter_um):
            # A disc that fits in one sample is a point: the sample's irradiance times its area.
            assert irradiance is not None
            return irradiance * np.float32(point_area_mm2(diameter_um))
        shape = self.shape_for(diameter_um)
        spectra = {} if spectra is None else spectra
        spectrum = spectra.get(shape)
        if spectrum is None:
            assert irradiance is not None
            spectra.clear()
            spectrum = spectra[shape] = self.spectrum(irradiance, shape)
        kspec, (kh, kw) = self._kernel_spectrum(diameter_um, shape)
        full = sfft.irfft2(spectrum * kspec, s=shape, workers=-1)
        out = np.array(full[kh // 2 : kh // 2 + g.rows, kw // 2 : kw // 2 + g.cols])
        del full
        # Float32 FFT round-off: values below 1e-6 of the largest are set to zero, so
        # that a frame lit elsewhere adds no spurious pulses at a location.
        out[out < 1e-6 * float(out.max())] = 0.0
        return out.astype(np.float32, copy=False)


def check_grid(grid: Any) -> RetinalGrid:
    if not isinstance(grid, RetinalGrid):
        raise ConfigError("grid", grid, "a RetinalGrid")
    return grid


def check_map(value: Any, grid: RetinalGrid, field: str) -> np.ndarray:
    return validate.finite_array(field, value, shape=grid.shape, lo=0.0, dtype=np.float32)


def disc_power_map(irradiance_mw_per_mm2: Any, grid: RetinalGrid, diameter_um: float) -> np.ndarray:
    """Power within a disc centred on each sample, mW (float32).

    Parameters
    ----------
    irradiance_mw_per_mm2 : array_like
        Retinal irradiance on ``grid``, >= 0.
    grid : RetinalGrid
        Sampling of the map.
    diameter_um : float
        Disc diameter on the retina (``alpha * f_eye``).

    Notes
    -----
    FFT convolution (``scipy.fft``, all cores) with an area-weighted disc:
    each kernel sample holds the area of its cell inside the circle, so a disc
    of any size is integrated without aliasing. A disc that fits inside one
    sample is a point: the power is the sample's irradiance times the disc
    area (the irradiance is taken as uniform within a sample). Light outside
    the grid is taken as zero.

    References
    ----------
    .. [1] ICNIRP (2013); IEC 60825-1:2014, Annex A (varying acceptance angle for extended sources).
    """
    grid = check_grid(grid)
    irr = check_map(irradiance_mw_per_mm2, grid, "irradiance_mw_per_mm2")
    d = validate.number("diameter_um", diameter_um, lo=0.0, lo_open=True)
    return DiscIntegrator(grid, d).power_map_mw(np.ascontiguousarray(irr), d)


def max_disc_power(
    irradiance_mw_per_mm2: Any,
    grid: RetinalGrid,
    alpha_mrad: float,
    *,
    eye: EyeModel = HUMAN_EYE,
) -> tuple[float, float, float]:
    """Largest power within a disc of angular diameter alpha centred on a sample of the map.

    Only sample centres are searched; :func:`stimplan.exposure.assess_sequence`
    bounds every centre, also between samples.

    Returns
    -------
    power_mw, x_um, y_um : float
        The power and the retinal position of the disc centre.

    References
    ----------
    .. [1] ICNIRP (2013); IEC 60825-1:2014, Annex A (varying acceptance angle).
    """
    d = retinal_image_diameter_um(alpha_mrad, eye)
    pm = disc_power_map(irradiance_mw_per_mm2, grid, d)
    row, col = peak_location(pm)
    x, y = grid.point_of(row, col)
    return float(pm[row, col]), float(x), float(y)


def peak_location(values: np.ndarray) -> tuple[int, int]:
    """Index of the maximum; among samples tied with it (to 1e-5), the one nearest their centroid.

    A disc larger than a hot spot holds the same power at many centres; this
    reports the centre of that plateau (the spot itself, or the middle of a
    uniform field) rather than an arbitrary corner of it. The tied samples are
    counted and visited in compiled passes, without index arrays.
    """
    rows, cols = values.shape
    flat = int(np.argmax(values))
    top = float(values.flat[flat])
    if top <= 0:
        return divmod(flat, cols)
    thr = values.dtype.type(top * (1 - 1e-5))  # compared in the map's own precision
    r, c = _tied_centre(np.ascontiguousarray(values), thr)
    return (int(r), int(c)) if r >= 0 else divmod(flat, cols)


@nb.njit(cache=True, nogil=True)
def _tied_centre(values, thr):  # pragma: no cover - compiled
    """Among samples ``>= thr``, the first (row-major) nearest their centroid; ``(-1, -1)``
    if only one sample is tied (integer index sums are exact)."""
    rows, cols = values.shape
    n = 0
    sum_r = 0
    sum_c = 0
    for i in range(rows):
        for j in range(cols):
            if values[i, j] >= thr:
                n += 1
                sum_r += i
                sum_c += j
    if n <= 1:
        return -1, -1
    r_mean = sum_r / n
    c_mean = sum_c / n
    best = np.inf
    br = bc = 0
    for i in range(rows):
        for j in range(cols):
            if values[i, j] >= thr:
                d2 = (i - r_mean) ** 2 + (j - c_mean) ** 2
                if d2 < best:
                    best = d2
                    br, bc = i, j
    return br, bc

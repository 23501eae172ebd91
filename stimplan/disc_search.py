"""Power within acceptance discs: exact sums at chosen centres and the search for the largest.

The varying-acceptance-angle method needs, for every predicted map and every
acceptance angle, the power within a disc at a few centres and the centre
where that power is largest. A full disc-power map (an FFT convolution of the
whole map) gives both, but costs two large FFTs per map and angle. Here:

* :class:`DiscSums` evaluates the exact area-weighted disc sum (the kernel of
  :func:`disc_kernel`) at any list of centres from row prefix sums: per kernel
  row one difference of two prefix sums for the cells wholly inside the
  circle, plus the few cut cells at the circle's edge, so a centre costs
  O(diameter) operations, not O(diameter²).
* :func:`search_max` finds the largest disc sum on a map: the disc-power map
  of the map pooled into cells (a small FFT convolution), then, from its best
  local maxima, exhaustive grids of exact sums, each finer than the last,
  down to one sample, then the centre of the plateau of tied values (a disc larger than a
  hot spot holds its power at many centres).

References
----------
.. [1] ICNIRP, "Guidelines on limits of exposure to laser radiation of
   wavelengths between 180 nm and 1,000 um", Health Phys. 105, 271 (2013)
   (varying acceptance angle for extended sources).
.. [2] F. C. Crow, "Summed-area tables for texture mapping", SIGGRAPH '84,
   Comput. Graph. 18(3), 207-212 (1984) (sums over a region from prefix sums).
"""

from __future__ import annotations

import math

import numba as nb
import numpy as np
import scipy.fft as sfft

from .errors import ConfigError

__all__ = ["disc_kernel", "kernel_half", "DiscSums", "Pooled", "prefix_sums", "search_max"]

#: Disc diameter per pooled cell in the coarse stage of :func:`search_max` (at least).
CELLS_PER_DIAMETER = 12
#: Coarse local maxima refined on the exact sums.
CANDIDATES = 8
#: Coarse maxima below this fraction of the coarse maximum are not refined.
CANDIDATE_FLOOR = 0.9
#: Values within this relative distance of the maximum are tied with it.
TIE = 1e-5


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

    References
    ----------
    .. [1] IEC 60825-1:2014, Annex A: the power is averaged over the acceptance disc.
    """
    r = diameter_um / 2.0
    hy = min(int(math.ceil(r / py + 0.5)), max_half_rows)
    hx = min(int(math.ceil(r / px + 0.5)), max_half_cols)
    yy = np.abs(np.arange(-hy, hy + 1) * py)
    xx = np.abs(np.arange(-hx, hx + 1) * px)
    near = np.hypot(np.maximum(yy - py / 2, 0)[:, None], np.maximum(xx - px / 2, 0)[None, :])
    far = np.hypot((yy + py / 2)[:, None], (xx + px / 2)[None, :])
    frac = (far <= r).astype(np.float64)
    edge = (near < r) & (far > r)
    if np.any(edge):
        ry, rx = np.nonzero(edge)
        m = len(ry)
        ns = 32 if m < 4000 else 16
        sub = (np.arange(ns) + 0.5) / ns - 0.5
        cy = (ry - hy) * py
        cx = (rx - hx) * px
        y = cy[:, None, None] + sub[None, :, None] * py
        x = cx[:, None, None] + sub[None, None, :] * px
        frac[ry, rx] = np.mean((x * x + y * y) <= r * r, axis=(1, 2))
    return (frac * (px * py * 1e-6)).astype(np.float32)


def prefix_sums(irradiance: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
    """Row prefix sums ``P[r, c] = sum(irradiance[r, :c])``, float64, ``(rows, cols + 1)``.

    ``out``, if given, is a float64 array of that shape to write into.
    """
    rows, cols = irradiance.shape
    if out is None:
        out = np.empty((rows, cols + 1), dtype=np.float64)
    elif out.shape != (rows, cols + 1) or out.dtype != np.float64 or not out.flags.c_contiguous:
        raise ConfigError("out", out, f"a C-contiguous float64 array of shape {(rows, cols + 1)}")
    _prefix_rows(np.ascontiguousarray(irradiance), out)
    return out


@nb.njit(parallel=True, cache=True, nogil=True)
def _prefix_rows(irr, out):  # pragma: no cover - compiled
    rows, cols = irr.shape
    for r in nb.prange(rows):
        acc = 0.0
        out[r, 0] = 0.0
        for c in range(cols):
            acc += irr[r, c]
            out[r, c + 1] = acc


@nb.njit(parallel=True, cache=True, nogil=True)
def _pool2(src, out):  # pragma: no cover - compiled
    """``out[i, j]`` = sum of ``src[2i:2i+2, 2j:2j+2]`` (zero beyond ``src``)."""
    rows, cols = src.shape
    ny, nx = out.shape
    for i in nb.prange(ny):
        for j in range(nx):
            acc = np.float32(0.0)
            for a in range(2 * i, min(2 * i + 2, rows)):
                for b in range(2 * j, min(2 * j + 2, cols)):
                    acc += src[a, b]
            out[i, j] = acc


class Pooled:
    """A map summed over cells of 2^k x 2^l samples, each level built from the last.

    Parameters
    ----------
    irradiance : ndarray
        The map (level (1, 1)).
    """

    def __init__(self, irradiance: np.ndarray):
        self._levels: dict[tuple[int, int], np.ndarray] = {
            (1, 1): np.ascontiguousarray(irradiance, dtype=np.float32)
        }

    def get(self, fy: int, fx: int) -> np.ndarray:
        """Sums over cells of ``fy x fx`` samples (powers of two), float32."""
        hit = self._levels.get((fy, fx))
        if hit is not None:
            return hit
        # the largest level held that divides this one
        by, bx = max((k for k in self._levels if fy % k[0] == 0 and fx % k[1] == 0), key=np.prod)
        src = self._levels[(by, bx)]
        while (by, bx) != (fy, fx):
            sy = 2 if by < fy else 1
            sx = 2 if bx < fx else 1
            if sy == 2 and sx == 2:
                out = np.empty((-(-src.shape[0] // 2), -(-src.shape[1] // 2)), np.float32)
                _pool2(src, out)
            else:
                out = _pooled(src, sy, sx)
            src, by, bx = out, by * sy, bx * sx
            self._levels[(by, bx)] = src
        return src


@nb.njit(parallel=True, cache=True, nogil=True)
def _sums_at(
    prefix, irr, rr, cc, run_dr, run_a, run_b, run_w, edge_dr, edge_dc, edge_w, out
):  # pragma: no cover - compiled
    rows, cols = irr.shape
    for i in nb.prange(rr.size):
        r0 = rr[i]
        c0 = cc[i]
        acc = 0.0
        for k in range(run_dr.size):
            r = r0 + run_dr[k]
            if r < 0 or r >= rows:
                continue
            a = max(c0 + run_a[k], 0)
            b = min(c0 + run_b[k], cols - 1)
            if a <= b:
                acc += run_w[k] * (prefix[r, b + 1] - prefix[r, a])
        for k in range(edge_dr.size):
            r = r0 + edge_dr[k]
            c = c0 + edge_dc[k]
            if 0 <= r < rows and 0 <= c < cols:
                acc += edge_w[k] * irr[r, c]
        out[i] = acc


class DiscSums:
    """Exact sums of the area-weighted disc kernel at chosen centres of one map.

    The kernel (:func:`disc_kernel`) is split, row by row, into the run of cells
    wholly inside the circle (one weight, summed from row prefix sums) and the
    cut cells at its edge (each with its own weight). Light outside the map is
    zero, as in a zero-padded convolution. The sums are formed in float64.

    Parameters
    ----------
    diameter_um : float
    pitch_x_um, pitch_y_um : float
    shape : tuple of int
        The map's ``(rows, cols)``.
    """

    def __init__(self, diameter_um: float, pitch_x_um: float, pitch_y_um: float, shape):
        rows, cols = shape
        hy, hx = kernel_half(diameter_um, pitch_x_um, pitch_y_um, rows, cols)
        self.diameter_um, self.pitch_x_um, self.pitch_y_um = diameter_um, pitch_x_um, pitch_y_um
        self.half = (hy, hx)
        self.shape = (rows, cols)
        self._coarse: dict = {}
        k = disc_kernel(diameter_um, pitch_x_um, pitch_y_um, hy, hx).astype(np.float64)
        full = k.max() if k.size else 0.0
        run_dr, run_a, run_b, run_w, edge = [], [], [], [], np.zeros(k.shape, bool)
        for i in range(k.shape[0]):
            inside = np.flatnonzero(k[i] == full)
            if inside.size:
                a, b = int(inside[0]), int(inside[-1])
                run_dr.append(i - hy)
                run_a.append(a - hx)
                run_b.append(b - hx)
                run_w.append(full)
                edge[i] = k[i] > 0
                edge[i, a : b + 1] = False
            else:
                edge[i] = k[i] > 0
        er, ec = np.nonzero(edge)
        self._runs = (
            np.asarray(run_dr, np.int64),
            np.asarray(run_a, np.int64),
            np.asarray(run_b, np.int64),
            np.asarray(run_w, np.float64),
        )
        self._edges = ((er - hy).astype(np.int64), (ec - hx).astype(np.int64), k[er, ec])

    def coarse_map(self, coarse: np.ndarray, fy: int, fx: int) -> np.ndarray:
        """Disc power (up to a constant) at the centres of a map pooled into ``fy x fx`` cells.

        Zero-padded FFT convolution with the disc kernel at the cell pitch; the
        kernel's spectrum is kept for the next map of the same shape.
        """
        key = (fy, fx, coarse.shape)
        hit = self._coarse.get(key)
        if hit is None:
            px, py = self.pitch_x_um * fx, self.pitch_y_um * fy
            hy, hx = kernel_half(self.diameter_um, px, py, *coarse.shape)
            kernel = disc_kernel(self.diameter_um, px, py, hy, hx)
            shape = _padded(coarse.shape, kernel.shape)
            hit = (sfft.rfft2(kernel, s=shape, workers=-1), kernel.shape, shape)
            self._coarse[key] = hit
        kspec, (kh, kw), shape = hit
        spec = sfft.rfft2(coarse, s=shape, workers=-1)
        spec *= kspec
        full = sfft.irfft2(spec, s=shape, workers=-1)
        rows, cols = coarse.shape
        return full[kh // 2 : kh // 2 + rows, kw // 2 : kw // 2 + cols]

    def at(self, prefix: np.ndarray, irradiance: np.ndarray, rows, cols) -> np.ndarray:
        """Disc sums (float64, mW for a map in mW/mm²) centred at samples ``(rows, cols)``.

        ``prefix`` is :func:`prefix_sums` of ``irradiance``.
        """
        rr = np.ascontiguousarray(rows, dtype=np.int64).ravel()
        cc = np.ascontiguousarray(cols, dtype=np.int64).ravel()
        out = np.empty(rr.size, dtype=np.float64)
        if rr.size:
            _sums_at(prefix, irradiance, rr, cc, *self._runs, *self._edges, out)
        return out


def _pooled(irradiance: np.ndarray, fy: int, fx: int) -> np.ndarray:
    """Sums over cells of ``fy x fx`` samples (zero beyond the map), float32."""
    rows, cols = irradiance.shape
    ny, nx = -(-rows // fy), -(-cols // fx)
    if ny * fy != rows or nx * fx != cols:
        padded = np.zeros((ny * fy, nx * fx), dtype=np.float32)
        padded[:rows, :cols] = irradiance
    else:
        padded = irradiance
    return padded.reshape(ny, fy, nx, fx).sum(axis=(1, 3), dtype=np.float32)


def _padded(shape: tuple[int, int], kernel_shape: tuple[int, int]) -> tuple[int, int]:
    return (
        sfft.next_fast_len(shape[0] + kernel_shape[0] - 1, real=True),
        sfft.next_fast_len(shape[1] + kernel_shape[1] - 1, real=True),
    )


def pool_factors(diameter_um: float, pitch_x_um: float, pitch_y_um: float) -> tuple[int, int]:
    """Cell size ``(fy, fx)`` of the coarse stage: powers of two, at least
    :data:`CELLS_PER_DIAMETER` cells across the disc."""

    def f(pitch: float) -> int:
        n = diameter_um / pitch / CELLS_PER_DIAMETER
        return 1 if n < 2 else 2 ** int(math.floor(math.log2(n)))

    return f(pitch_y_um), f(pitch_x_um)


def search_max(
    irradiance: np.ndarray, prefix: np.ndarray, sums: DiscSums, pooled: Pooled | None = None
) -> tuple[int, int, float]:
    """Centre ``(row, col)`` and value (mW) of the largest disc sum on a map.

    Parameters
    ----------
    irradiance : ndarray, float32
        The map, mW/mm².
    prefix : ndarray
        :func:`prefix_sums` of it.
    sums : DiscSums
        The disc on this grid.
    pitch_x_um, pitch_y_um, diameter_um : float

    Returns
    -------
    row, col : int
    value : float
        The exact disc sum there.

    Notes
    -----
    The map is pooled into cells of :func:`pool_factors` (at least
    :data:`CELLS_PER_DIAMETER` across the disc) and integrated over the disc at
    the cell pitch by FFT convolution; the disc-power map varies little within
    a cell, so the global maximum lies next to one of the largest coarse
    local maxima. The :data:`CANDIDATES` largest of them (within
    :data:`CANDIDATE_FLOOR` of the largest) are refined on the exact sums: a
    9 x 9 grid spanning two cells on either side, then grids four times finer
    around the best point down to one sample, then single steps uphill. Among samples
    tied with the result (to :data:`TIE`), the middle of the tied run along
    the row and then along the column is taken, twice. This is a search, not
    an exhaustive scan: a maximum narrower than a cell and hidden beside a
    larger coarse maximum can be missed (the tests bound the miss on
    speckle, gratings, spots and edges).

    References
    ----------
    .. [1] ICNIRP (2013); IEC 60825-1:2014, Annex A (varying acceptance angle).
    """
    rows, cols = irradiance.shape
    fy, fx = pool_factors(sums.diameter_um, sums.pitch_x_um, sums.pitch_y_um)
    coarse = (Pooled(irradiance) if pooled is None else pooled).get(fy, fx)
    if not coarse.max() > 0:
        return 0, 0, 0.0
    cmap = sums.coarse_map(coarse, fy, fx)
    pr, pc = _local_maxima(cmap)
    order = np.argsort(-cmap[pr, pc], kind="stable")[:CANDIDATES]
    r0 = np.minimum(pr[order].astype(np.int64) * fy + fy // 2, rows - 1)
    c0 = np.minimum(pc[order].astype(np.int64) * fx + fx // 2, cols - 1)
    r, c, value = _climb(irradiance, prefix, sums, r0, c0, max(fy, fx))
    k = int(np.argmax(value))  # the first of the largest, in the candidates' order
    return _plateau_centre(irradiance, prefix, sums, int(r[k]), int(c[k]), float(value[k]))


def _local_maxima(cmap: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cells of ``cmap`` within :data:`CANDIDATE_FLOOR` of its maximum that no
    neighbour exceeds (at least the maximum itself), in row-major order."""
    values = np.ascontiguousarray(cmap)
    top = float(values.max())
    flags = np.zeros(values.shape, dtype=np.bool_)
    _flag_local_maxima(values, np.float64(CANDIDATE_FLOOR * top), flags)
    pr, pc = _flagged(flags)
    if pr.size:
        return pr, pc
    return np.unravel_index(np.array([int(np.argmax(values))]), values.shape)


@nb.njit(cache=True, nogil=True)
def _flagged(flags):  # pragma: no cover - compiled
    """``np.nonzero`` of a 2-D boolean array (fast when few cells are set)."""
    rows, cols = flags.shape
    n = 0
    for i in range(rows):
        for j in range(cols):
            if flags[i, j]:
                n += 1
    pr = np.empty(n, np.int64)
    pc = np.empty(n, np.int64)
    k = 0
    for i in range(rows):
        for j in range(cols):
            if flags[i, j]:
                pr[k] = i
                pc[k] = j
                k += 1
    return pr, pc


@nb.njit(parallel=True, cache=True, nogil=True)
def _flag_local_maxima(values, threshold, flags):  # pragma: no cover - compiled
    rows, cols = values.shape
    for i in nb.prange(rows):
        for j in range(cols):
            v = values[i, j]
            if v < threshold:
                continue
            peak = True
            for di in range(-1, 2):
                for dj in range(-1, 2):
                    a, b = i + di, j + dj
                    if (di or dj) and 0 <= a < rows and 0 <= b < cols and values[a, b] > v:
                        peak = False
            flags[i, j] = peak


def _climb(irr, prefix, sums, r, c, cell):
    """Refine coarse maxima, all candidates at once: exhaustive grids of 9 x 9 exact
    sums around each (the first spans two cells on either side), each four times finer
    than the last and spanning two of its steps, then single steps uphill until none
    rises. Each candidate climbs on its own; they share the calls. Returns each
    candidate's final ``(rows, cols, values)``."""
    rows, cols = irr.shape
    r = np.array(r, dtype=np.int64)
    c = np.array(c, dtype=np.int64)
    value = sums.at(prefix, irr, r, c)

    def best_of(ri, ci, offs):
        gr = np.clip(ri[:, None, None] + offs[None, :, None], 0, rows - 1)
        gc = np.clip(ci[:, None, None] + offs[None, None, :], 0, cols - 1)
        gr, gc = (a.reshape(ri.size, -1) for a in np.broadcast_arrays(gr, gc))
        vals = sums.at(prefix, irr, gr, gc).reshape(ri.size, -1)
        k = np.argmax(vals, axis=1)  # the first of the largest, row-major as a meshgrid
        sel = np.arange(ri.size)
        return gr[sel, k], gc[sel, k], vals[sel, k]

    span = 2 * max(1, cell)
    while True:
        step = max(1, span // 4)
        br, bc, bv = best_of(r, c, np.arange(-span, span + 1, step))
        up = bv > value
        r, c, value = np.where(up, br, r), np.where(up, bc, c), np.where(up, bv, value)
        if step == 1:
            break
        span = step
    active = np.arange(r.size)  # the maximum may sit on the last grid's edge
    while active.size:
        br, bc, bv = best_of(r[active], c[active], np.array([-1, 0, 1]))
        up = bv > value[active]
        moved = active[up]
        r[moved], c[moved], value[moved] = br[up], bc[up], bv[up]
        active = moved
    return r, c, value


def _run_end(irr, prefix, sums, r, c, dr, dc, thr) -> int:
    """How far the tied values run from ``(r, c)`` in direction ``(dr, dc)`` (samples)."""
    rows, cols = irr.shape

    def tied(k: int) -> bool:
        rr, cc = r + dr * k, c + dc * k
        if not (0 <= rr < rows and 0 <= cc < cols):
            return False
        return float(sums.at(prefix, irr, [rr], [cc])[0]) >= thr

    lo, hi = 0, 1
    while tied(hi):
        lo, hi = hi, hi * 2
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if tied(mid):
            lo = mid
        else:
            hi = mid
    return lo


def _plateau_centre(irr, prefix, sums, r, c, value):
    if value <= 0:
        return r, c, max(value, 0.0)
    thr = value * (1 - TIE)
    rows, cols = irr.shape
    nr = np.array([r, r, r - 1, r + 1])
    nc = np.array([c - 1, c + 1, c, c])
    ok = (nr >= 0) & (nr < rows) & (nc >= 0) & (nc < cols)
    if not np.any(sums.at(prefix, irr, nr[ok], nc[ok]) >= thr):
        return r, c, value  # no tied neighbour: no run to centre on
    for _ in range(2):
        for dr, dc in ((0, 1), (1, 0)):
            ahead = _run_end(irr, prefix, sums, r, c, dr, dc, thr)
            back = _run_end(irr, prefix, sums, r, c, -dr, -dc, thr)
            shift = (ahead - back) // 2
            if shift:
                nr, nc = r + dr * shift, c + dc * shift
                v = float(sums.at(prefix, irr, [nr], [nc])[0])
                if v >= thr:
                    r, c = nr, nc
                    value = max(value, v)
    return r, c, float(sums.at(prefix, irr, [r], [c])[0])

"""Cheap upper bounds of a map's largest disc power, from block sums.

A map is uniform within each sample. Pool it into blocks of ``m x m``
samples (block sums). A disc centred anywhere in block ``(I, J)`` has positive
area only in blocks whose rectangle lies within its radius of that block's
rectangle, that is ``gap_x^2 + gap_y^2 < r^2`` with ``gap_x = max(|dJ| - 1, 0)
m p_x`` (and likewise in y). The sum of those blocks therefore bounds the
disc power at every centre of block ``(I, J)``, also between samples. Over all
blocks it is one convolution of the block sums with a 0/1 kernel, done by FFT
on the pooled grid (``m^2`` times smaller than the map) in float64, with a
bound of its round-off added.

The bound is loose by about the disc's perimeter times ``2 m`` samples, so it
is tight for discs much wider than a block and loose for small ones; the
assessment uses it where it already settles an acceptance angle, and refines
(finer blocks, then full disc-power maps) only where it does not. Each bound
also gives candidate centres (the blocks with the largest bounds), where exact
disc sums give a value found.

References
----------
.. [1] N. J. Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed.,
   SIAM (2002), Thm. 24.2 (FFT round-off; from memory) and §4.2 (recursive
   summation).
.. [2] A. H. Land and A. G. Doig, "An automatic method of solving discrete
   programming problems", Econometrica 28, 497-520 (1960) (bounds that prune).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba as nb
import numpy as np
import scipy.fft as sfft

__all__ = ["PooledBound", "PooledMap", "touching_kernel"]

_U64 = 2.0**-53
#: Candidate centres (blocks with the largest bounds) returned per bound.
CANDIDATES = 12


@nb.njit(cache=True, parallel=True, nogil=True)
def _pool(a, m, out):  # pragma: no cover - compiled
    rows, cols = a.shape
    for big in nb.prange(out.shape[0]):
        for i in range(big * m, min((big + 1) * m, rows)):
            for j in range(cols):
                out[big, j // m] += a[i, j]


@nb.njit(cache=True, parallel=True, nogil=True)
def _norms(a):  # pragma: no cover - compiled
    rows, cols = a.shape
    s1 = np.zeros(rows)
    s2 = np.zeros(rows)
    for i in nb.prange(rows):
        t1 = 0.0
        t2 = 0.0
        for j in range(cols):
            v = float(a[i, j])
            t1 += abs(v)
            t2 += v * v
        s1[i] = t1
        s2[i] = t2
    return s1.sum(), s2.sum()


def touching_kernel(radius_um: float, block_x_um: float, block_y_um: float) -> np.ndarray:
    """0/1 kernel of the blocks a disc centred in the middle block can reach.

    Offset ``(dI, dJ)`` is 1 when the gap between the two block rectangles,
    ``(max(|dJ| - 1, 0) block_x_um, max(|dI| - 1, 0) block_y_um)``, is no
    longer than ``radius_um``; a disc centred anywhere in the middle block has
    zero area in every other block.
    """
    r = float(radius_um)
    hi = int(math.floor(r / block_y_um)) + 1
    hj = int(math.floor(r / block_x_um)) + 1
    gy = np.maximum(np.abs(np.arange(-hi, hi + 1)) - 1, 0) * block_y_um
    gx = np.maximum(np.abs(np.arange(-hj, hj + 1)) - 1, 0) * block_x_um
    return (gy[:, None] ** 2 + gx[None, :] ** 2 <= r * r).astype(np.float64)


@dataclass(frozen=True)
class PooledBound:
    """Upper bound of a map's disc power over every centre, from blocks of ``block`` samples.

    ``rows`` and ``cols`` are fractional sample indices of candidate centres
    (the middles of the blocks with the largest bounds), best first.
    """

    bound_mw: float
    block: int
    rows: np.ndarray
    cols: np.ndarray


class PooledMap:
    """A map's block sums at several block sizes, made on demand and kept.

    Parameters
    ----------
    irradiance : ndarray
        The map (mW/mm^2 per sample, >= 0).
    pitch_x_um, pitch_y_um : float
        Sample pitches.
    """

    def __init__(self, irradiance: np.ndarray, pitch_x_um: float, pitch_y_um: float):
        self.irradiance = np.ascontiguousarray(irradiance)
        self.pitch_x_um, self.pitch_y_um = float(pitch_x_um), float(pitch_y_um)
        self._blocks: dict[int, tuple[np.ndarray, float, float]] = {}
        self._spectra: dict[tuple, np.ndarray] = {}
        self._map_norms: tuple[float, float] | None = None

    def blocks(self, m: int) -> tuple[np.ndarray, float, float]:
        """Block sums of ``m x m`` samples (float64) with their 1- and 2-norms."""
        hit = self._blocks.get(m)
        if hit is None:
            rows, cols = self.irradiance.shape
            out = np.zeros((-(-rows // m), -(-cols // m)), dtype=np.float64)
            _pool(self.irradiance, int(m), out)
            hit = (out, float(out.sum()), float(np.sqrt(np.sum(out * out))))
            self._blocks[m] = hit
        return hit

    def norms(self) -> tuple[float, float]:
        """The map's 1- and 2-norms (float64 sums of ``rows * cols`` terms, raised by
        their rounding bound, Higham §4.2: upper bounds)."""
        if self._map_norms is None:
            l1, sq = _norms(self.irradiance)
            rows, cols = self.irradiance.shape
            up = 1.0 + 2.0 * (rows * cols + 2) * _U64
            self._map_norms = (l1 * up, math.sqrt(sq * up) * (1.0 + 2.0 * _U64))
        return self._map_norms

    def forget(self) -> None:
        """Drop the kept spectra (block sums stay: they are small)."""
        self._spectra.clear()

    def block_bounds_mw(
        self, diameter_um: float, m: int, within: tuple[slice, slice] | None = None
    ) -> np.ndarray:
        """Per block of ``m x m`` samples: upper bound (mW) of the disc power of
        ``diameter_um`` at every centre in the block, also between samples.

        ``within`` (sample slices, whole blocks) limits the blocks to a box: the
        convolution is then done on the part of the pooled map their discs
        reach. The bound includes the float64 round-off of the pooling (sums of
        at most ``m^2`` terms, Higham §4.2) and of the FFT convolution (Higham
        Thm. 24.2, with a factor of 2 as in
        :meth:`stimplan.exposure.discs.DiscIntegrator.error_bound_mw`).
        """
        b, l1, l2 = self.blocks(m)
        kernel = touching_kernel(diameter_um / 2.0, m * self.pitch_x_um, m * self.pitch_y_um)
        kh, kw = kernel.shape
        n, k = b.shape
        i0, i1, j0, j1 = 0, n, 0, k
        if within is not None:
            i0, i1 = within[0].start // m, -(-within[0].stop // m)
            j0, j1 = within[1].start // m, -(-within[1].stop // m)
        # the blocks that discs centred in blocks i0..i1 reach (the kernel is symmetric)
        w0, w1 = max(i0 - kh // 2, 0), min(i1 + kh // 2, n)
        v0, v1 = max(j0 - kw // 2, 0), min(j1 + kw // 2, k)
        part = b[w0:w1, v0:v1]
        shape = (
            sfft.next_fast_len(part.shape[0] + kh - 1, real=True),
            sfft.next_fast_len(part.shape[1] + kw - 1, real=True),
        )
        key = (m, shape, w0, w1, v0, v1)
        spec = self._spectra.get(key)
        if spec is None:
            spec = self._spectra[key] = sfft.rfft2(part, s=shape, workers=-1)
        full = sfft.irfft2(spec * sfft.rfft2(kernel, s=shape, workers=-1), s=shape, workers=-1)
        a, c = i0 - w0 + kh // 2, j0 - v0 + kw // 2
        u = full[a : a + (i1 - i0), c : c + (j1 - j0)]
        k1 = float(kernel.sum())
        k2 = math.sqrt(k1)
        eps = 5.0 * math.log2(shape[0] * shape[1]) * _U64
        fft_err = 2.0 * ((2.0 * eps + 2.0 * _U64) * l2 * k1 + _U64 * l1 * k2)
        pool_err = (m * m + 2) * _U64 * l1
        cell_mm2 = self.pitch_x_um * self.pitch_y_um * 1e-6
        return (u + (fft_err + pool_err)) * cell_mm2

    def bound(
        self, diameter_um: float, m: int, region: tuple[slice, slice, float] | None = None
    ) -> PooledBound:
        """Upper bound (mW) of the disc power of ``diameter_um`` over every centre
        (the largest of :meth:`block_bounds_mw`), with candidate centres.

        ``region`` (from :meth:`region` at a coarser block size, a multiple of
        ``m``) limits the blocks to its box; its ``rest`` bounds the centres
        outside and is part of the bound.
        """
        within = None if region is None else region[:2]
        u = self.block_bounds_mw(diameter_um, m, within)
        k = u.shape[1]
        bound = float(u.max())
        off_r = 0 if within is None else within[0].start // m
        off_c = 0 if within is None else within[1].start // m
        flat = u.ravel()
        # the candidates are taken among the blocks within 2 % of the largest bound (at
        # least that one): seeds for exact sums, not part of the bound
        near = np.flatnonzero(flat >= bound - 0.02 * abs(bound))
        c = min(CANDIDATES, near.size)
        idx = near[np.argpartition(flat[near], near.size - c)[near.size - c :]]
        idx = idx[np.argsort(flat[idx])[::-1]]
        big_r, big_c = np.divmod(idx, k)
        rows, cols = self.irradiance.shape
        mid = (m - 1) / 2.0
        rr = np.minimum((big_r + off_r) * m + mid, rows - 1).astype(np.float64)
        cc = np.minimum((big_c + off_c) * m + mid, cols - 1).astype(np.float64)
        if region is not None:
            bound = max(bound, region[2])
        return PooledBound(bound, int(m), rr, cc)

    def region(
        self,
        diameter_um: float,
        m: int,
        level_mw: float,
        within: tuple[slice, slice, float] | None = None,
    ) -> tuple[slice, slice, float]:
        """Where the largest disc power can reach ``level_mw``: the rows and columns
        (slices of samples, whole blocks) of the box around every block whose bound
        reaches it, and the largest bound (mW) of the centres outside that box (0 if
        none): every centre outside holds at most that.

        ``within`` is a region found at a coarser block size (a multiple of
        ``m``): only its box is searched, and its ``rest`` is kept.
        """
        u = self.block_bounds_mw(diameter_um, m, None if within is None else within[:2])
        off_r = 0 if within is None else within[0].start // m
        off_c = 0 if within is None else within[1].start // m
        keep = u >= level_mw
        rows, cols = self.irradiance.shape
        if not keep.any():
            keep = u >= u.max()
        br = np.flatnonzero(keep.any(axis=1))
        bc = np.flatnonzero(keep.any(axis=0))
        i0, i1, j0, j1 = int(br[0]), int(br[-1]) + 1, int(bc[0]), int(bc[-1]) + 1
        outside = u.copy()
        outside[i0:i1, j0:j1] = -np.inf
        rest = float(outside.max()) if outside.size > (i1 - i0) * (j1 - j0) else 0.0
        if within is not None:
            rest = max(rest, within[2])
        i0, i1, j0, j1 = i0 + off_r, i1 + off_r, j0 + off_c, j1 + off_c
        box = (slice(i0 * m, min(i1 * m, rows)), slice(j0 * m, min(j1 * m, cols)))
        return box[0], box[1], max(rest, 0.0)

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
        self._spectra: dict[tuple[int, tuple[int, int]], np.ndarray] = {}

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

    def forget(self) -> None:
        """Drop the kept spectra (block sums stay: they are small)."""
        self._spectra.clear()

    def block_bounds_mw(self, diameter_um: float, m: int) -> np.ndarray:
        """Per block of ``m x m`` samples: upper bound (mW) of the disc power of
        ``diameter_um`` at every centre in the block, also between samples.

        The bound includes the float64 round-off of the pooling (sums of at
        most ``m^2`` terms, Higham §4.2) and of the FFT convolution (Higham
        Thm. 24.2, with a factor of 2 as in
        :meth:`stimplan.exposure.discs.DiscIntegrator.error_bound_mw`).
        """
        b, l1, l2 = self.blocks(m)
        kernel = touching_kernel(diameter_um / 2.0, m * self.pitch_x_um, m * self.pitch_y_um)
        kh, kw = kernel.shape
        n, k = b.shape
        shape = (
            sfft.next_fast_len(n + kh - 1, real=True),
            sfft.next_fast_len(k + kw - 1, real=True),
        )
        spec = self._spectra.get((m, shape))
        if spec is None:
            spec = self._spectra[(m, shape)] = sfft.rfft2(b, s=shape, workers=-1)
        full = sfft.irfft2(spec * sfft.rfft2(kernel, s=shape, workers=-1), s=shape, workers=-1)
        u = full[kh // 2 : kh // 2 + n, kw // 2 : kw // 2 + k]
        k1 = float(kernel.sum())
        k2 = math.sqrt(k1)
        eps = 5.0 * math.log2(shape[0] * shape[1]) * _U64
        fft_err = 2.0 * ((2.0 * eps + 2.0 * _U64) * l2 * k1 + _U64 * l1 * k2)
        pool_err = (m * m + 2) * _U64 * l1
        cell_mm2 = self.pitch_x_um * self.pitch_y_um * 1e-6
        return (u + (fft_err + pool_err)) * cell_mm2

    def bound(self, diameter_um: float, m: int) -> PooledBound:
        """Upper bound (mW) of the disc power of ``diameter_um`` over every centre
        (the largest of :meth:`block_bounds_mw`), with candidate centres."""
        u = self.block_bounds_mw(diameter_um, m)
        k = u.shape[1]
        bound = float(u.max())
        flat = u.ravel()
        c = min(CANDIDATES, flat.size)
        idx = np.argpartition(flat, flat.size - c)[flat.size - c :]
        idx = idx[np.argsort(flat[idx])[::-1]]
        big_r, big_c = np.divmod(idx, k)
        rows, cols = self.irradiance.shape
        mid = (m - 1) / 2.0
        rr = np.minimum(big_r * m + mid, rows - 1).astype(np.float64)
        cc = np.minimum(big_c * m + mid, cols - 1).astype(np.float64)
        return PooledBound(bound, int(m), rr, cc)

    def region(self, diameter_um: float, m: int, level_mw: float) -> tuple[slice, slice, float]:
        """Where the largest disc power can reach ``level_mw``: the rows and columns
        (slices of samples, whole blocks) of the box around every block whose bound
        reaches it, and the largest bound (mW) of the centres outside that box (0 if
        none): every centre outside holds at most that.
        """
        u = self.block_bounds_mw(diameter_um, m)
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
        box = (slice(i0 * m, min(i1 * m, rows)), slice(j0 * m, min(j1 * m, cols)))
        return box[0], box[1], max(rest, 0.0)

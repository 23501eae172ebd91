"""A retinal power map blurred by the source's angular spread.

A source that is not a single transverse mode blurs the far field by its
angular distribution (:mod:`stimplan.optics.source`): the map is convolved
with a kernel of unit sum, a Gaussian (``M²``) or a uniform disc (a multimode
fibre), here on the map's grid. The convolution is circular: the predicted map
is one diffraction order of the pixel grid, and the far field of the pixels is
periodic with that order, so light blurred past one edge is the light that the
neighbouring order blurs in across it.

The kernel is sampled on the grid and normalised to a sum of 1, so the blur
keeps the power of the map (to float32 round-off) and, with a non-negative
kernel, gives a non-negative map: the FFT's round-off can leave values of a
few 1e-7 of the peak below zero, and those are set to zero (they are not
light). The disc's samples are the disc's area share of each cell, from a 4 × 4
sub-sampling.

For the exposure: the power of the blurred map in any disc is the kernel's
weighted average of the unblurred map's powers in the same disc moved about,
so its largest disc power never exceeds the unblurred map's. A blur that is
overstated (``m_squared`` or a fibre larger than the source's) therefore
understates the exposure; the unblurred map bounds it whatever the blur.

References
----------
.. [1] L. Mandel and E. Wolf, *Optical Coherence and Quantum Optics* (1995),
   §5.3 (far field of a Schell-model source: the coherent far field convolved
   with the angular spectrum of the degree of coherence); from memory.
.. [2] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005), §2.1
   (convolution theorem; the DFT's circular convolution).
"""

from __future__ import annotations

import numpy as np
import scipy.fft as sfft

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid

__all__ = ["gaussian_kernel_axis", "disc_kernel", "blur_power_map"]

#: Sub-samples per cell side for the disc kernel's area shares.
DISC_SUBSAMPLES = 4


def _wrapped_offsets(n: int) -> np.ndarray:
    """Sample offsets from index 0 on a circle of ``n`` samples: 0, 1, ..., -2, -1."""
    k = np.arange(n)
    return np.where(k <= n // 2, k, k - n).astype(np.float64)


def gaussian_kernel_axis(n: int, sigma_samples: float) -> np.ndarray:
    """A sampled, circular Gaussian of unit sum along one axis, origin at index 0.

    ``exp(-k² / (2 σ²))`` summed over the images ``k + j n`` (a Gaussian on a
    circle), normalised; a delta for ``σ = 0``.

    Parameters
    ----------
    n : int
        Samples on the axis.
    sigma_samples : float
        Standard deviation in samples, >= 0.

    Returns
    -------
    ndarray, float64, shape ``(n,)``
    """
    s = validate.number("sigma_samples", sigma_samples, lo=0)
    out = np.zeros(n, dtype=np.float64)
    if s == 0:
        out[0] = 1.0
        return out
    k = _wrapped_offsets(n)
    images = int(np.ceil(10.0 * s / n)) + 1
    for j in range(-images, images + 1):
        out += np.exp(-((k + j * n) ** 2) / (2.0 * s * s))
    return out / out.sum()


def disc_kernel(shape: tuple[int, int], radius_rc: tuple[float, float]) -> np.ndarray:
    """A uniform disc (an ellipse in samples) of unit sum, centred at index ``[0, 0]``.

    Each cell holds the disc's area share in it, from ``4 × 4`` sub-samples
    per cell; a disc smaller than one cell is a delta.

    Parameters
    ----------
    shape : tuple of int
        ``(rows, cols)`` of the map.
    radius_rc : tuple of float
        The disc's radius in samples along rows and along columns (the
        retinal radius over each pitch), each under half the map.

    Returns
    -------
    ndarray, float64, shape ``shape``
    """
    rows, cols = shape
    ry, rx = (float(r) for r in radius_rc)
    if ry >= rows / 2 or rx >= cols / 2:
        raise ConfigError(
            "illumination.fibre_core_um",
            None,
            "a source blur smaller than half the predicted field",
            f"the fibre's disc has a radius of {ry:.0f} x {rx:.0f} samples on a "
            f"{rows} x {cols} map",
        )
    out = np.zeros(shape, dtype=np.float64)
    hy, hx = int(np.ceil(ry + 1)), int(np.ceil(rx + 1))
    m = DISC_SUBSAMPLES
    sub = (np.arange(m) + 0.5) / m - 0.5
    dy = (np.arange(-hy, hy + 1)[:, None] + sub[None, :]).reshape(-1)
    dx = (np.arange(-hx, hx + 1)[:, None] + sub[None, :]).reshape(-1)
    inside = ((dy[:, None] / max(ry, 1e-12)) ** 2 + (dx[None, :] / max(rx, 1e-12)) ** 2) <= 1.0
    cells = inside.reshape(2 * hy + 1, m, 2 * hx + 1, m).sum(axis=(1, 3)).astype(np.float64)
    if cells.sum() == 0:  # smaller than a sub-sample: a delta
        out[0, 0] = 1.0
        return out
    r_idx = np.arange(-hy, hy + 1) % rows
    c_idx = np.arange(-hx, hx + 1) % cols
    np.add.at(out, (r_idx[:, None], c_idx[None, :]), cells)
    return out / out.sum()


def blur_power_map(power: np.ndarray, grid: RetinalGrid, blur, *, workers: int = -1) -> np.ndarray:
    """The map convolved (circularly) with the source's blur kernel, float32.

    Parameters
    ----------
    power : ndarray, shape ``grid.shape``
        A power (or irradiance) map, float32.
    grid : RetinalGrid
        Its grid (the pitches convert the kernel's µm to samples).
    blur : SourceBlur
        From :meth:`stimplan.optics.system.OpticalSystem.source_blur`.
    workers : int
        Threads for :mod:`scipy.fft`.

    Returns
    -------
    ndarray, float32
        The blurred map (``power`` itself when there is no blur); its sum is
        that of ``power`` to float32 round-off.

    References
    ----------
    .. [1] Goodman (2005), §2.1 (convolution theorem).
    """
    if not blur.active:
        return power
    rows, cols = grid.shape
    if blur.kind == "gaussian":
        if 3.0 * blur.size_um >= min(grid.height_um, grid.width_um) / 2:
            raise ConfigError(
                "illumination.m_squared",
                None,
                "a source blur (3 sigma) smaller than half the predicted field",
                f"sigma {blur.size_um:.3g} um on a field of {grid.width_um:.4g} um",
            )
        ky = gaussian_kernel_axis(rows, blur.size_um / grid.pitch_y_um)
        kx = gaussian_kernel_axis(cols, blur.size_um / grid.pitch_x_um)
        # the transform of a separable kernel is the outer product of the axes' transforms
        spec_k = np.outer(sfft.fft(ky).astype(np.complex64), sfft.rfft(kx).astype(np.complex64))
    else:
        radius_rc = (blur.size_um / grid.pitch_y_um, blur.size_um / grid.pitch_x_um)
        kern = disc_kernel(grid.shape, radius_rc).astype(np.float32)
        spec_k = sfft.rfft2(kern, workers=workers)
        del kern
    spec = sfft.rfft2(np.asarray(power, dtype=np.float32), workers=workers)
    spec *= spec_k
    out = sfft.irfft2(spec, s=grid.shape, workers=workers, overwrite_x=True)
    out = np.asarray(out, dtype=np.float32)
    np.maximum(out, 0.0, out=out)  # round-off below zero only (the kernel is non-negative)
    return out

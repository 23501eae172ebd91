"""Fringing-field crosstalk between liquid-crystal pixels.

An ideal SLM shows a uniform phase over each pixel, independent of its
neighbours. In a liquid-crystal SLM the electric field spreads across the
border of neighbouring pixels (the *fringing field*) and the elastic forces
of the liquid crystal forbid abrupt changes, so the realised phase changes
gradually across each pixel edge [1]_, [2]_. A phase reset of a blazed
grating becomes a *flyback* region that diffracts light away from the
intended order, into the zero order and ghost orders.

The model here is the common one (its kernel is not taken from the papers'
text, which was not at hand beyond their abstracts and introductions; from
memory): the realised phase is the ideal staircase (pixelated) phase convolved
with a smoothing kernel whose width is set by the fringing. The kernel is a
square box of side ``w = fringing_um`` (separable), so every pixel edge
becomes a linear transition of width ``w`` between the two pixels' phases
(``w <= pitch``). The smoothed phase is evaluated at ``q x q`` sub-pixel
sample points, and the field is ``exp(i phi_smooth)``.

The far field of the central diffraction order is computed without forming
the ``q``-times finer plane: with a sub-pixel sample ``(j, l)`` of every pixel
taken as one polyphase component, the central order of the fine grid's
unitary DFT is

    ``G(k) = (1/q²) sum_jl exp(-2πi (k_y t_j + k_x t_l) / M) DFT_M[c exp(i phi_jl)](k)``,

(``t_j`` the sub-sample offset in pixels, ``M`` the padded size), that is
``q²`` transforms on the ordinary prediction grid. A sub-pixel cell of width
``p/q`` has the envelope ``sinc²(u p / q)``, and since ``sinc(u p) =
sinc(u p/q) · D_q(u)/q`` (``D_q`` the Dirichlet kernel of the ``q`` cells), a
field that is constant across each pixel gives back exactly the pixel's own
``sinc²(u p)`` envelope: the pixel envelope is not applied a second time.
The fill factor (a pixel aperture of side ``sqrt(ff) p``) is taken as separable
from the fringing: the far field is multiplied by the ratio of the aperture's
envelope to the full pixel's, ``ff² sinc²(sqrt(ff) u p) / sinc²(u p)``. This is
exact for ``fringing_um = 0`` (it reproduces the ideal prediction) and for
``fill_factor = 1``.

References
----------
.. [1] M. Persson et al., "Reducing the effect of pixel crosstalk in phase
   only spatial light modulators," Opt. Express 20, 22334 (2012), §1 (the
   causes: fringing fields and elastic forces across pixel borders).
.. [2] S. Moser et al., "Model-based compensation of pixel crosstalk in liquid
   crystal spatial light modulators," Opt. Express 27, 25046 (2019)
   (abstract: a full 3-D model validates a simplified, faster one).
.. [3] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed. (2005),
   §4.2.2, eq. (4-28) (rectangular aperture).
.. [4] G. J. Swanson, "Binary optics technology: the theory and design of
   multi-level diffractive optical elements," MIT Lincoln Laboratory Tech.
   Rep. 854 (1989).
"""

from __future__ import annotations

import numpy as np
import scipy.fft as sfft

from .. import validate
from ..errors import ConfigError
from . import kernels

__all__ = [
    "edge_weights",
    "subpixel_offsets",
    "smoothed_phase",
    "crosstalk_envelope_axes",
    "fringed_far_power",
]


def subpixel_offsets(samples_per_pixel: int) -> np.ndarray:
    """Centres of ``q`` equal sub-pixel cells, in pixels from the pixel centre.

    Returns
    -------
    ndarray, float64, shape ``(q,)``
        ``(j + 1/2)/q - 1/2`` for ``j = 0 .. q-1``.
    """
    q = validate.integer("slm.fringing_samples", samples_per_pixel, lo=1, hi=16)
    return (np.arange(q) + 0.5) / q - 0.5


def edge_weights(offset_px: float, fringing_px: float) -> tuple[float, float, float]:
    """Weights of the left neighbour, the pixel and the right neighbour at a point.

    The realised phase at ``offset_px`` (pixels from the pixel centre, in
    [-1/2, 1/2]) is the mean of the staircase phase over a box of width
    ``fringing_px``; the weights are the box's overlaps with the three pixels.

    Parameters
    ----------
    offset_px : float
        Position in the pixel, pixels from its centre.
    fringing_px : float
        Width of the box, pixels, in [0, 1].

    Returns
    -------
    tuple of float
        ``(left, self, right)``, summing to 1.

    References
    ----------
    .. [1] Persson et al. (2012); Moser et al. (2019): the realised phase as the
       pixelated phase smoothed across pixel borders.
    """
    w = validate.number("fringing_px", fringing_px, lo=0, hi=1)
    t = float(offset_px)
    if w == 0:
        return 0.0, 1.0, 0.0
    left = max(0.0, w / 2 - 0.5 - t) / w
    right = max(0.0, t + w / 2 - 0.5) / w
    return left, 1.0 - left - right, right


def smoothed_phase(
    phase_rad: np.ndarray, fringing_px: float, offset_y_px: float, offset_x_px: float
) -> np.ndarray:
    """The realised phase at one sub-pixel point of every pixel (float32).

    Parameters
    ----------
    phase_rad : ndarray, shape ``(rows, cols)``
        The ideal (per-pixel) phase shown, radians, as the drive gives it (a
        reset from near 2π to near 0 becomes a flyback).
    fringing_px : float
        Width of the fringing transition at a pixel edge, pixels, in [0, 1].
    offset_y_px, offset_x_px : float
        The point in the pixel, pixels from its centre (y down the rows).

    Returns
    -------
    ndarray, float32, shape ``(rows, cols)``
        The box-smoothed phase at that point. Beyond the SLM's border the
        edge pixels are repeated.

    References
    ----------
    .. [1] Persson et al. (2012); Moser et al. (2019).
    """
    ph = np.asarray(phase_rad, dtype=np.float32)
    if ph.ndim != 2:
        raise ConfigError("phase_rad", ph.shape, "a 2-D array")
    ly, sy, ry = (np.float32(v) for v in edge_weights(offset_y_px, fringing_px))
    lx, sx, rx = (np.float32(v) for v in edge_weights(offset_x_px, fringing_px))
    rows = ph
    if lx or rx:
        rows = ph * sx
        if lx:
            rows[:, 1:] += lx * ph[:, :-1]
            rows[:, :1] += lx * ph[:, :1]
        if rx:
            rows[:, :-1] += rx * ph[:, 1:]
            rows[:, -1:] += rx * ph[:, -1:]
    if not (ly or ry):
        return rows if rows is not ph else ph.copy()
    out = rows * sy
    if ly:
        out[1:] += ly * rows[:-1]
        out[:1] += ly * rows[:1]
    if ry:
        out[:-1] += ry * rows[1:]
        out[-1:] += ry * rows[-1:]
    return out


def crosstalk_envelope_axes(
    padded_shape: tuple[int, int], samples_per_pixel: int, fill_factor: float
) -> tuple[np.ndarray, np.ndarray]:
    """Weights of the sub-pixel far field on the central order (rows carry ``ff²``).

    Per axis, sample ``k`` from the centre of an ``M``-sample order has
    ``u p = k / M``; the weight is the sub-cell envelope times the fill
    factor's aperture relative to the full pixel,
    ``sinc²(k/(qM)) · sinc²(sqrt(ff) k/M) / sinc²(k/M)``.

    Returns
    -------
    tuple of ndarray, float32
        ``(rows, cols)`` factors.

    References
    ----------
    .. [1] Goodman (2005), §4.2.2, eq. (4-28).
    """
    q = validate.integer("slm.fringing_samples", samples_per_pixel, lo=1, hi=16)
    ff = validate.number("slm.fill_factor", fill_factor, lo=0, hi=1, lo_open=True)
    f = np.sqrt(ff)

    def axis(n: int) -> np.ndarray:
        u = (np.arange(n) - n // 2) / n  # |u p| <= 1/2: sinc(u p) > 0.63
        return np.sinc(u / q) ** 2 * np.sinc(f * u) ** 2 / np.sinc(u) ** 2

    return (axis(padded_shape[0]) * ff * ff).astype(np.float32), axis(padded_shape[1]).astype(
        np.float32
    )


def _signed_frequencies(n: int) -> np.ndarray:
    """Signed frequency (samples from the centre of the shifted order) of each FFT index."""
    i = np.arange(n)
    return ((i + n // 2) % n) - n // 2


def fringed_far_power(
    amplitude: np.ndarray,
    displayed_phase_rad: np.ndarray,
    cancelled_phase_rad: np.ndarray | None,
    pupil: np.ndarray | None,
    padded_shape: tuple[int, int],
    *,
    fringing_px: float,
    samples_per_pixel: int,
    fill_factor: float,
    scale: float,
    workers: int = -1,
) -> np.ndarray:
    """Central-order far-field power (float32, centred) of an SLM with fringing fields.

    Parameters
    ----------
    amplitude : ndarray, shape ``(rows, cols)``
        Beam amplitude on each pixel, sqrt(mW) (``|c|²`` is the power on the cell).
    displayed_phase_rad : ndarray
        The per-pixel phase the SLM is driven to show, radians; it is smoothed.
    cancelled_phase_rad : ndarray or None
        A per-pixel phase added after smoothing (the lens, correction and focus
        terms that the optics cancel or add), radians.
    pupil : ndarray or None
        The pupil's mask on the pixels (0/1).
    padded_shape : tuple of int
        The prediction grid (one order of the pixel grid).
    fringing_px : float
        Fringing transition width, pixels, in [0, 1].
    samples_per_pixel : int
        Sub-pixel samples ``q`` along each axis.
    fill_factor : float
        The pixel aperture's share of the pixel area.
    scale : float
        Factor on the power (reflectance, relay, modulated share).
    workers : int
        FFT threads.

    Returns
    -------
    ndarray, float32, shape ``padded_shape``
        Power per sample, mW, zero frequency at ``[P // 2, Q // 2]``.

    Notes
    -----
    Memory: one complex64 accumulator and one work plane of ``padded_shape``,
    and a few float32 planes of the SLM's shape; time: ``q²`` FFTs of the
    prediction grid instead of one.

    References
    ----------
    .. [1] Persson et al. (2012); Moser et al. (2019) (the smoothed phase).
    .. [2] Goodman (2005), §4.2.2, eq. (4-28) (sub-cell and pixel envelopes).
    """
    q = validate.integer("slm.fringing_samples", samples_per_pixel, lo=1, hi=16)
    kern = kernels.SERIAL if workers == 1 else kernels.PARALLEL
    amp = np.ascontiguousarray(amplitude, dtype=np.float32)
    pu = np.ones_like(amp) if pupil is None else np.ascontiguousarray(pupil, dtype=np.float32)
    pr, pc = padded_shape
    ky = _signed_frequencies(pr) / pr
    kx = _signed_frequencies(pc) / pc
    acc = np.zeros(padded_shape, dtype=np.complex64)
    buf = np.empty(padded_shape, dtype=np.complex64)
    offsets = subpixel_offsets(q)
    for ty in offsets:
        fy = np.exp(-2j * np.pi * ky * ty).astype(np.complex64)
        for tx in offsets:
            ph = smoothed_phase(displayed_phase_rad, fringing_px, ty, tx)
            if cancelled_phase_rad is not None:
                ph += cancelled_phase_rad
            kern.slm_field_shifted(amp, np.ascontiguousarray(ph), pu, buf)
            spec = sfft.fft2(buf, norm="ortho", workers=workers, overwrite_x=True)
            fx = np.exp(-2j * np.pi * kx * tx).astype(np.complex64)
            kern.accumulate_phased(acc, spec, fy, fx)
    wr, wc = crosstalk_envelope_axes(padded_shape, q, fill_factor)
    out = np.empty(padded_shape, dtype=np.float32)
    kern.shifted_power(acc, wr, wc, np.float32(scale / q**4), out)
    return out

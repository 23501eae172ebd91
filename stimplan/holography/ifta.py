"""Iterative Fourier-transform algorithms (IFTA) for phase-only holograms.

Gerchberg–Saxton (GS), weighted GS (WGS) and mixed-region amplitude freedom
(MRAF), plus a pixel-domain weighting that equalises the power of groups of
samples (e.g. the photodiodes of implant pixels).

The loop runs in the FFT's native (unshifted) order, on pre-allocated
complex64 buffers; each iteration is one forward FFT, one fused far-field
constraint pass, one inverse FFT and one fused SLM-plane constraint pass.

References
----------
.. [1] R. W. Gerchberg and W. O. Saxton, "A practical algorithm for the
   determination of phase from image and diffraction plane pictures",
   *Optik* 35, 237 (1972).
.. [2] J. R. Fienup, "Phase retrieval algorithms: a comparison", *Appl. Opt.*
   21, 2758 (1982).
.. [3] R. Di Leonardo, F. Ianni and G. Ruocco, "Computer generation of optimal
   holograms for optical trap arrays", *Opt. Express* 15, 1913 (2007).
.. [4] M. Pasienski and B. DeMarco, "A high-accuracy algorithm for designing
   arbitrary holographic atom traps", *Opt. Express* 16, 2176 (2008).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.fft as sfft

from .. import validate
from ..errors import ConfigError
from ..optics.target import Target
from . import kernels

__all__ = ["IftaSettings", "IftaResult", "run_ifta", "METHODS"]

METHODS = ("gs", "wgs", "mraf")


@dataclass(frozen=True)
class IftaSettings:
    """Settings of a hologram computation.

    Parameters
    ----------
    method : {"gs", "wgs", "mraf"}
        Gerchberg–Saxton, weighted GS or MRAF.
    iterations : int
        Number of iterations, in [1, 10000].
    seed : int
        Seed of the random initial phase.
    mraf_mix : float
        MRAF mixing parameter ``m`` in (0, 1]: the share of the far-field
        amplitude given to the signal region. Used by "mraf", and by "wgs"
        when the target has a free region.
    window_margin_samples : int
        For "mraf" on a target without a free region: the signal window is the
        lit area dilated by this many samples, the rest is free.
    quantized_iterations : int
        The last iterations impose the SLM's phase levels in the loop, so the
        design knows about quantisation.
    group_weighting : bool
        Pixel-domain weighting: one weight per target group (``Target.groups``),
        updated to equalise the power of the groups.
    group_gain : float
        Exponent of the group-weight update, in (0, 2].
    initial : {"random", "lens"}
        Start phase: uniform random from ``seed``, or a quadratic (lens)
        phase that spreads the beam over the size of the lit target plus a
        small random part. The lens start avoids the phase vortices that
        random starts leave in extended patterns.
    """

    method: str = "mraf"
    iterations: int = 60
    seed: int = 0
    mraf_mix: float = 0.6
    window_margin_samples: int = 3
    quantized_iterations: int = 0
    group_weighting: bool = False
    group_gain: float = 1.0
    initial: str = "random"

    def __post_init__(self) -> None:
        f = object.__setattr__
        validate.choice("hologram.method", self.method, METHODS)
        f(
            self,
            "iterations",
            validate.integer("hologram.iterations", self.iterations, lo=1, hi=10000),
        )
        f(self, "seed", validate.integer("hologram.seed", self.seed, lo=0, hi=2**63 - 1))
        f(
            self,
            "mraf_mix",
            validate.number("hologram.mraf_mix", self.mraf_mix, lo=0, hi=1, lo_open=True),
        )
        f(
            self,
            "window_margin_samples",
            validate.integer(
                "hologram.window_margin_samples", self.window_margin_samples, lo=0, hi=1000
            ),
        )
        f(
            self,
            "quantized_iterations",
            validate.integer(
                "hologram.quantized_iterations", self.quantized_iterations, lo=0, hi=self.iterations
            ),
        )
        validate.choice("hologram.initial", self.initial, ("random", "lens"))
        f(
            self,
            "group_weighting",
            validate.boolean("hologram.group_weighting", self.group_weighting),
        )
        f(
            self,
            "group_gain",
            validate.number("hologram.group_gain", self.group_gain, lo=0, hi=2, lo_open=True),
        )


@dataclass(frozen=True)
class IftaResult:
    """Output of :func:`run_ifta`.

    Attributes
    ----------
    phase_rad : ndarray, float32
        SLM phase in [0, 2π), in array (not FFT) order.
    target : Target
        The target actually used (MRAF may have added a free region).
    lit_fraction_history : ndarray
        Fraction of the far-field power on lit target samples, before the
        constraint of each iteration (a design-grid efficiency).
    group_weights : ndarray or None
        Final pixel-domain weights, one per group.
    """

    phase_rad: np.ndarray
    target: Target
    lit_fraction_history: np.ndarray
    group_weights: np.ndarray | None = None


def run_ifta(
    target: Target,
    source_amplitude: np.ndarray,
    settings: IftaSettings | None = None,
    *,
    phase_levels: int | None = None,
    initial_phase_rad: np.ndarray | None = None,
    progress: Callable[[int], None] | None = None,
    workers: int = -1,
) -> IftaResult:
    """Compute a phase-only hologram for ``target``.

    Parameters
    ----------
    target : Target
        Target on the design grid (one sample per SLM pixel).
    source_amplitude : ndarray, shape ``target.shape``
        Beam amplitude on the SLM (any scale). A Gaussian beam is honoured as
        such: the SLM-plane constraint keeps this amplitude.
    settings : IftaSettings
    phase_levels : int, optional
        SLM levels, used by ``settings.quantized_iterations``.
    initial_phase_rad : ndarray, optional
        Start from this SLM phase (e.g. a related hologram) instead of a
        random one.
    progress : callable, optional
        Called with the number of iterations done, after each iteration.
    workers : int
        FFT threads; ``1`` also selects single-threaded element-wise kernels
        (for batches that run several holograms at once).

    Returns
    -------
    IftaResult

    References
    ----------
    .. [1] Gerchberg & Saxton (1972); [2] Fienup (1982); [3] Di Leonardo et
       al. (2007); [4] Pasienski & DeMarco (2008).
    """
    st = settings or IftaSettings()
    K = kernels.SERIAL if workers == 1 else kernels.PARALLEL
    if not isinstance(target, Target):
        raise ConfigError("target", type(target).__name__, "a stimplan Target")
    shape = target.shape
    src = validate.finite_array("source_amplitude", source_amplitude, shape=shape, lo=0.0)
    if float(src.max()) <= 0:
        raise ConfigError("source_amplitude", "all zero", "a beam with non-zero amplitude")
    if st.quantized_iterations and phase_levels is None:
        raise ConfigError("phase_levels", None, "the SLM's level count for quantized_iterations")

    tgt = target
    if st.method == "mraf" and not np.any(tgt.free):
        tgt = tgt.with_window(st.window_margin_samples)
    use_free = st.method in ("mraf", "wgs") and bool(np.any(tgt.free))
    mix = np.float32(st.mraf_mix if use_free else 1.0)

    # --- buffers in FFT order -------------------------------------------------
    def fft_order(a, dtype):
        return np.ascontiguousarray(sfft.ifftshift(a).astype(dtype, copy=False)).ravel()

    src_f = fft_order(src, np.float32)
    t = np.sqrt(tgt.intensity.astype(np.float64))
    t_sig = t * tgt.signal
    total_src = float(np.sum(src_f.astype(np.float64) ** 2))
    t_sig *= np.sqrt(total_src / float(np.sum(t_sig**2)))
    t_f = fft_order(t_sig, np.float32)
    free_f = fft_order(tgt.free, np.bool_)
    signal_f = fft_order(tgt.signal, np.bool_)

    rng = np.random.default_rng(st.seed)
    if initial_phase_rad is None and st.initial == "lens":
        phase0 = lens_start_phase(src, tgt, rng)
    elif initial_phase_rad is None:
        phase0 = rng.uniform(0.0, 2 * np.pi, size=shape).astype(np.float32)
    else:
        phase0 = validate.finite_array("initial_phase_rad", initial_phase_rad, shape=shape)
    e = fft_order(phase0, np.float32)
    e = (src_f * np.exp(1j * e)).astype(np.complex64)
    e2 = e.reshape(shape)

    weights = None
    groups_f = None
    gw = None
    n_groups = 0
    if st.method == "wgs":
        weights = np.ones(e.size, np.float32)
    if st.group_weighting:
        if tgt.groups is None:
            raise ConfigError("target.groups", None, "group labels for group_weighting")
        groups_f = fft_order(np.where(tgt.lit, tgt.groups, -1), np.int32)
        n_groups = int(groups_f.max()) + 1
        if n_groups < 1:
            raise ConfigError("target.groups", "no lit group", "at least one lit group")
        gw = np.ones(n_groups, np.float32)
        t2 = t_f.astype(np.float64) ** 2
        goal = np.bincount(groups_f[groups_f >= 0], weights=t2[groups_f >= 0], minlength=n_groups)
        present = goal > 0
    history = np.empty(st.iterations, np.float64)
    inv_norm = 0.0
    n_q_start = st.iterations - st.quantized_iterations
    for it in range(st.iterations):
        f2 = sfft.fft2(e2, norm="ortho", workers=workers, overwrite_x=True)
        f = f2.ravel()
        if groups_f is not None:
            p = K.group_power(f, groups_f, n_groups)
            if it > 0:
                ratio = np.ones(n_groups)
                tot_p = p[present].sum()
                tot_goal = goal[present].sum()
                if tot_p > 0:
                    rel = (p[present] / tot_p) / (goal[present] / tot_goal)
                    ratio[present] = np.power(np.maximum(rel, 1e-6), -0.5 * st.group_gain)
                gw *= ratio.astype(np.float32)
                gw /= np.float32(np.mean(gw[present]))
            lit_p = K.far_group_weighted(f, t_f, gw, groups_f, free_f, mix)
            lit_p = float(p.sum())
        elif st.method == "gs":
            lit_p = K.far_gs(f, t_f)
        elif st.method == "mraf":
            lit_p = K.far_mraf(f, t_f, signal_f, mix)
        else:
            if it == 0:
                nz = t_f > 0
                inv_norm = 1.0 / np.sqrt(max(float(np.sum(np.abs(f[nz]) ** 2)), 1e-30))
            lit_p = K.far_wgs(
                f, t_f, weights, np.float32(inv_norm * np.sqrt(total_src)), True, free_f, mix
            )
            inv_norm = 1.0 / np.sqrt(max(lit_p, 1e-30))
        history[it] = lit_p / total_src
        e2 = sfft.ifft2(f2, norm="ortho", workers=workers, overwrite_x=True)
        e = e2.ravel()
        if it >= n_q_start:
            K.slm_constraint_quantized(e, src_f, np.float32(phase_levels))
        else:
            K.slm_constraint(e, src_f)
        if progress is not None:
            progress(it + 1)
    phase = np.angle(sfft.fftshift(e2)).astype(np.float32)
    phase = np.mod(phase, np.float32(2 * np.pi), out=phase)
    return IftaResult(phase, tgt, history, gw)


def lens_start_phase(source_amplitude: np.ndarray, target: Target, rng) -> np.ndarray:
    """Quadratic start phase that spreads the beam over the lit target.

    A local phase gradient ``dφ/dn`` sends light to far-field sample
    ``N/(2π) dφ/dn``; the quadratic phase ``π W n² / (N N_b)`` maps a beam
    of ``N_b`` pixels (its second-moment width) onto ``W`` samples, the
    second-moment width of the lit target, centred on the target's
    centroid. A small random part (0.1 rad) breaks symmetry.

    References
    ----------
    .. [1] J. R. Fienup, *Appl. Opt.* 21, 2758 (1982), on starting guesses.
    """
    ny, nx = source_amplitude.shape
    w = source_amplitude.astype(np.float64) ** 2
    t = target.intensity.astype(np.float64)
    rows = np.arange(ny) - ny // 2
    cols = np.arange(nx) - nx // 2
    phase = np.zeros((ny, nx))
    for axis, idx, n in ((0, rows, ny), (1, cols, nx)):
        pw = w.sum(axis=1 - axis)
        pt = t.sum(axis=1 - axis)
        mb = (pw * idx).sum() / pw.sum()
        nb = 4.0 * np.sqrt(max((pw * (idx - mb) ** 2).sum() / pw.sum(), 1.0))
        mt = (pt * idx).sum() / pt.sum()
        wt = 4.0 * np.sqrt(max((pt * (idx - mt) ** 2).sum() / pt.sum(), 0.25))
        quad = np.pi * wt * (idx - mb) ** 2 / (n * nb) + 2 * np.pi * mt * idx / n
        phase += quad[:, np.newaxis] if axis == 0 else quad[np.newaxis, :]
    phase += 0.1 * rng.standard_normal((ny, nx))
    return np.mod(phase, 2 * np.pi).astype(np.float32)

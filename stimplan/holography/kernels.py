"""Fused element-wise kernels of the IFTA loop (numba, parallel, in place).

Each kernel makes one pass over a complex64 plane and replaces it in place,
so that an iteration costs two FFTs plus two memory passes. The arrays are
1-D views of C-contiguous planes.
"""

from __future__ import annotations

import os

# OpenMP worker threads that busy-wait after a parallel kernel steal the cores
# from the FFT threads that run next; a passive wait policy keeps the
# iteration at the FFT floor. It must be set before numba starts its pool.
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

import numba as nb
import numpy as np

_OPTS = {"parallel": True, "fastmath": True, "cache": True, "nogil": True}
_SERIAL = {"parallel": False, "fastmath": True, "cache": True, "nogil": True}


@nb.njit(**_OPTS)
def slm_constraint(e, src):  # pragma: no cover - compiled
    """``e <- src * e / |e|`` (keep the phase, impose the beam amplitude)."""
    for i in nb.prange(e.size):
        z = e[i]
        a = np.sqrt(z.real * z.real + z.imag * z.imag)
        if a > 0:
            e[i] = z * (src[i] / a)
        else:
            e[i] = src[i]


@nb.njit(**_OPTS)
def slm_constraint_quantized(e, src, levels):  # pragma: no cover - compiled
    """Impose the beam amplitude and round the phase to ``levels`` levels."""
    step = np.float32(2.0 * np.pi / levels)
    for i in nb.prange(e.size):
        z = e[i]
        ph = np.arctan2(z.imag, z.real)
        ph = np.float32(np.rint(ph / step)) * step
        e[i] = src[i] * np.complex64(np.cos(ph) + 1j * np.sin(ph))


@nb.njit(**_OPTS)
def far_gs(f, t):  # pragma: no cover - compiled
    """GS: ``f <- t * f / |f|``; returns the power ``sum |f|^2`` where ``t > 0``."""
    s = 0.0
    for i in nb.prange(f.size):
        z = f[i]
        a2 = z.real * z.real + z.imag * z.imag
        ti = t[i]
        if ti > 0:
            s += a2
        if a2 > 0:
            f[i] = z * (ti / np.sqrt(a2))
        else:
            f[i] = ti
    return s


@nb.njit(**_OPTS)
def far_mraf(f, t, signal, mix):  # pragma: no cover - compiled
    """MRAF: ``m t f/|f|`` in the signal region, ``(1 - m) f`` in the free region."""
    s = 0.0
    keep = np.float32(1.0) - mix
    for i in nb.prange(f.size):
        z = f[i]
        if signal[i]:
            a2 = z.real * z.real + z.imag * z.imag
            ti = t[i]
            if ti > 0:
                s += a2
            if a2 > 0:
                f[i] = z * (mix * ti / np.sqrt(a2))
            else:
                f[i] = mix * ti
        else:
            f[i] = z * keep
    return s


@nb.njit(**_OPTS)
def far_wgs(f, t, w, inv_norm, update, free, mix):  # pragma: no cover - compiled
    """Weighted GS in the signal region, optionally MRAF-style free region.

    Where ``t > 0`` the weight is updated as ``w <- w * t / (|f| / norm)``
    (Di Leonardo et al. 2007), then ``f <- w t f/|f|``. Dark signal samples
    are set to zero; free samples keep ``(1 - mix) f``. Returns the power
    where ``t > 0``.
    """
    s = 0.0
    keep = np.float32(1.0) - mix
    for i in nb.prange(f.size):
        z = f[i]
        if free[i]:
            f[i] = z * keep
            continue
        ti = t[i]
        if ti > 0:
            a2 = z.real * z.real + z.imag * z.imag
            s += a2
            a = np.sqrt(a2)
            if update:
                g = a * inv_norm
                if g > 1e-12:
                    w[i] = w[i] * (ti / g)
            if a > 0:
                f[i] = z * (mix * w[i] * ti / a)
            else:
                f[i] = mix * w[i] * ti
        else:
            f[i] = 0
    return s


@nb.njit(cache=True, nogil=True)
def group_power(f, groups, n_groups):  # pragma: no cover - compiled
    """Power ``sum |f|^2`` per group label (labels < 0 ignored)."""
    out = np.zeros(n_groups, np.float64)
    for i in range(f.size):
        g = groups[i]
        if g >= 0:
            z = f[i]
            out[g] += z.real * z.real + z.imag * z.imag
    return out


@nb.njit(**_OPTS)
def far_group_weighted(f, t, gw, groups, free, mix):  # pragma: no cover - compiled
    """Amplitude constraint with one weight per group (pixel-domain weighting).

    In the signal region ``f <- mix * gw[group] * t f/|f|`` (samples without a
    group use weight 1); free samples keep ``(1 - mix) f``; dark samples
    become 0.
    """
    keep = np.float32(1.0) - mix
    for i in nb.prange(f.size):
        z = f[i]
        if free[i]:
            f[i] = z * keep
            continue
        ti = t[i]
        if ti > 0:
            g = groups[i]
            wi = gw[g] if g >= 0 else np.float32(1.0)
            a = np.sqrt(z.real * z.real + z.imag * z.imag)
            if a > 0:
                f[i] = z * (mix * wi * ti / a)
            else:
                f[i] = mix * wi * ti
        else:
            f[i] = 0


@nb.njit(**_OPTS)
def gather_scaled(src, src_r, src_c, ratio_r, ratio_c, out):  # pragma: no cover - compiled
    """``out[i, j] = src[src_r[i], src_c[j]] * ratio_r[i] * ratio_c[j]`` (2-D float32)."""
    for i in nb.prange(out.shape[0]):
        r = src_r[i]
        w = ratio_r[i]
        for j in range(out.shape[1]):
            out[i, j] = src[r, src_c[j]] * w * ratio_c[j]


@nb.njit(**_OPTS)
def slm_field_shifted(amp, phase, pupil, out):  # pragma: no cover - compiled
    """Write ``amp * exp(i phase) * pupil`` (SLM shape) into ``out`` (padded shape) at its
    centred place, in ``ifftshift`` order, and zero the rest of ``out``: pixel ``(i, j)``
    goes to ``((i - rows // 2) mod P, (j - cols // 2) mod Q)``."""
    rows, cols = amp.shape
    pr, pc = out.shape
    h = cols // 2
    for r in nb.prange(pr):
        i = (r + rows // 2) % pr  # the SLM row that lands on padded row r, if any
        if i >= rows:
            for c in range(pc):
                out[r, c] = 0
            continue
        for j in range(h, cols):  # columns 0 .. cols - h - 1 of the padded row
            a = amp[i, j] * pupil[i, j]
            ph = phase[i, j]
            out[r, j - h] = np.complex64(a * np.cos(ph) + 1j * (a * np.sin(ph)))
        for c in range(cols - h, pc - h):
            out[r, c] = 0
        for j in range(h):  # the left half wraps to the end of the row
            a = amp[i, j] * pupil[i, j]
            ph = phase[i, j]
            out[r, pc - h + j] = np.complex64(a * np.cos(ph) + 1j * (a * np.sin(ph)))


@nb.njit(**_OPTS)
def shifted_power(f, weight_rows, weight_cols, scale, out):  # pragma: no cover - compiled
    """``out[k, l] = |f[(k - P // 2) mod P, (l - Q // 2) mod Q]|² * weight_rows[k] *
    weight_cols[l] * scale`` (the power of ``fftshift(f)`` times a separable weight,
    float32), in two contiguous runs per row."""
    pr, pc = f.shape
    h = pc // 2
    for k in nb.prange(pr):
        r = (k - pr // 2) % pr
        w = weight_rows[k] * scale
        for c in range(pc - h):  # out columns h .. pc-1 read f columns 0 .. pc-h-1
            z = f[r, c]
            out[k, c + h] = (z.real * z.real + z.imag * z.imag) * w * weight_cols[c + h]
        for c in range(pc - h, pc):  # out columns 0 .. h-1 read f columns pc-h .. pc-1
            z = f[r, c]
            d = c - (pc - h)
            out[k, d] = (z.real * z.real + z.imag * z.imag) * w * weight_cols[d]


@nb.njit(**_OPTS)
def accumulate_phased(acc, f, phase_rows, phase_cols):  # pragma: no cover - compiled
    """``acc[r, c] += f[r, c] * phase_rows[r] * phase_cols[c]`` (complex64, in place): one
    polyphase component of a sub-pixel far field added with its shift factor."""
    pr, pc = f.shape
    for r in nb.prange(pr):
        a = phase_rows[r]
        for c in range(pc):
            acc[r, c] += f[r, c] * (a * phase_cols[c])


@nb.njit(**_OPTS)
def sums_and_scale(power, region, use_region, tau, inv_area):  # pragma: no cover - compiled
    """``(sum(power), sum(power * region))`` in float64 (region ignored unless
    ``use_region``), then ``power <- (power * tau) * inv_area`` in place (float32)."""
    total = 0.0
    inside = 0.0
    for i in nb.prange(power.size):
        x = power[i]
        total += np.float64(x)
        if use_region:
            inside += np.float64(x) * region[i]
        power[i] = (x * tau) * inv_area
    return total, inside


class _Set:
    """One family of compiled kernels (parallel or single-threaded)."""

    def __init__(self, opts: dict) -> None:
        self.slm_constraint = nb.njit(**opts)(slm_constraint.py_func)
        self.slm_constraint_quantized = nb.njit(**opts)(slm_constraint_quantized.py_func)
        self.far_gs = nb.njit(**opts)(far_gs.py_func)
        self.far_mraf = nb.njit(**opts)(far_mraf.py_func)
        self.far_wgs = nb.njit(**opts)(far_wgs.py_func)
        self.far_group_weighted = nb.njit(**opts)(far_group_weighted.py_func)
        self.group_power = group_power
        self.slm_field_shifted = nb.njit(**opts)(slm_field_shifted.py_func)
        self.shifted_power = nb.njit(**opts)(shifted_power.py_func)
        self.sums_and_scale = nb.njit(**opts)(sums_and_scale.py_func)
        self.accumulate_phased = nb.njit(**opts)(accumulate_phased.py_func)


#: Kernels that use numba's thread pool (one hologram at a time, all cores).
PARALLEL = _Set(_OPTS)
#: Single-threaded kernels, for batches that run several holograms at once in
#: threads (no nested thread pools, and no reliance on a thread-safe numba
#: threading layer).
SERIAL = _Set(_SERIAL)

"""Targets: the intensity a hologram should form, with its regions.

A target lives on the far-field *design* grid (one sample per SLM pixel).
It has three regions:

* **signal**: samples whose intensity must match the target (lit or dark);
* **free**: samples that may take any light (the MRAF noise region);
* samples in neither are **dark**: they should get no light.

References
----------
.. [1] M. Pasienski and B. DeMarco, "A high-accuracy algorithm for designing
   arbitrary holographic atom traps", *Opt. Express* 16, 2176 (2008).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numba as nb
import numpy as np
import scipy.sparse as sp
from scipy import ndimage

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid, interval_overlap

__all__ = ["Target", "resample_coverage"]


@dataclass(frozen=True)
class Target:
    """Target intensity and regions on the design grid.

    Parameters
    ----------
    intensity : ndarray, float32, shape ``grid.shape``
        Relative target intensity in [0, 1].
    grid : RetinalGrid
        The design grid.
    signal : ndarray of bool, optional
        Signal region. Defaults to every sample that is not free.
    free : ndarray of bool, optional
        Free (noise) region. Defaults to none.
    groups : ndarray of int32, optional
        Group label per sample (-1: none), e.g. the implant pixel a sample
        belongs to, for pixel-domain weighting.
    name : str
        A label.
    """

    intensity: np.ndarray
    grid: RetinalGrid
    signal: np.ndarray | None = None
    free: np.ndarray | None = None
    groups: np.ndarray | None = None
    name: str = "target"

    def __post_init__(self) -> None:
        if not isinstance(self.grid, RetinalGrid):
            raise ConfigError("target.grid", self.grid, "a RetinalGrid")
        t = validate.finite_array("target.intensity", self.intensity, shape=self.grid.shape, lo=0.0)
        if t.size and float(t.max()) > 1.0 + 1e-6:
            raise ConfigError(
                "target.intensity", float(t.max()), "values in [0, 1]", "scale the pattern first"
            )
        object.__setattr__(self, "intensity", np.ascontiguousarray(t, dtype=np.float32))
        free = self.free
        if free is None:
            free = np.zeros(self.grid.shape, bool)
        free = _bool_mask("target.free", free, self.grid.shape)
        signal = self.signal
        signal = ~free if signal is None else _bool_mask("target.signal", signal, self.grid.shape)
        if np.any(signal & free):
            raise ConfigError("target.free", "overlaps signal", "disjoint signal and free regions")
        if np.any((t > 0) & ~signal):
            raise ConfigError(
                "target.signal",
                "lit samples outside",
                "a signal region that holds every lit sample",
            )
        if not np.any(t > 0):
            raise ConfigError("target.intensity", "all zero", "at least one lit sample")
        object.__setattr__(self, "free", free)
        object.__setattr__(self, "signal", signal)
        if self.groups is not None:
            g = np.asarray(self.groups)
            if g.shape != self.grid.shape or g.dtype.kind not in "iu":
                raise ConfigError(
                    "target.groups", g, f"an integer array of shape {self.grid.shape}"
                )
            object.__setattr__(self, "groups", g.astype(np.int32, copy=False))

    @property
    def shape(self) -> tuple[int, int]:
        return self.grid.shape

    @property
    def lit(self) -> np.ndarray:
        """Samples with non-zero target intensity."""
        return self.intensity > 0

    @property
    def dark(self) -> np.ndarray:
        """Samples that must stay dark (neither lit signal nor free)."""
        return ~self.free & ~self.lit

    @classmethod
    def from_intensity(
        cls, intensity: np.ndarray, grid: RetinalGrid, *, name: str = "target"
    ) -> Target:
        """A target whose whole field is signal (plain GS/WGS use)."""
        arr = validate.finite_array("target.intensity", intensity, shape=grid.shape, lo=0.0)
        peak = float(arr.max()) if arr.size else 0.0
        if peak <= 0:
            raise ConfigError("target.intensity", "all zero", "at least one lit sample")
        return cls(arr / np.float32(peak), grid, name=name)

    def with_window(self, margin_samples: int = 4) -> Target:
        """Signal region = lit samples dilated by ``margin_samples``; the rest free (MRAF)."""
        m = validate.integer("margin_samples", margin_samples, lo=0)
        sig = self.lit
        if m:
            sig = ndimage.binary_dilation(sig, iterations=m)
        return replace(self, signal=sig, free=~sig)

    def shifted(self, rows: int, cols: int) -> Target:
        """The target translated by whole samples; refuses to wrap around the field.

        Raises
        ------
        ConfigError
            If the lit or signal samples would leave the field.
        """
        R, C = self.shape
        keep = (self.signal | self.lit) if np.any(self.free) else self.lit
        rr = np.flatnonzero(keep.any(axis=1))
        cc = np.flatnonzero(keep.any(axis=0))
        if rr[0] + rows < 0 or rr[-1] + rows >= R or cc[0] + cols < 0 or cc[-1] + cols >= C:
            g = self.grid
            raise ConfigError(
                "offset_um",
                (round(cols * g.pitch_x_um, 1), round(-rows * g.pitch_y_um, 1)),
                "an offset that keeps the pattern inside the steerable field "
                f"({g.width_um:.0f} × {g.height_um:.0f} µm)",
            )

        def roll(a):
            return None if a is None else np.roll(a, (rows, cols), axis=(0, 1))

        return replace(
            self,
            intensity=roll(self.intensity),
            signal=roll(self.signal),
            free=roll(self.free),
            groups=roll(self.groups),
        )

    def region_on(self, grid: RetinalGrid, which: str = "lit") -> np.ndarray:
        """Area coverage (0..1) of a region on a concentric finer grid.

        Parameters
        ----------
        grid : RetinalGrid
            A grid concentric with the design grid (e.g. the prediction grid).
        which : {"lit", "signal", "dark", "free"}
        """
        mask = {"lit": self.lit, "signal": self.signal, "dark": self.dark, "free": self.free}[
            validate.choice("which", which, ("lit", "signal", "dark", "free"))
        ]
        return resample_coverage(mask.astype(np.float32), self.grid, grid)

    def intensity_on(self, grid: RetinalGrid) -> np.ndarray:
        """Target intensity area-resampled onto a concentric grid."""
        return resample_coverage(self.intensity, self.grid, grid)


def _bool_mask(field: str, a, shape) -> np.ndarray:
    arr = np.asarray(a)
    if arr.shape != tuple(shape):
        raise ConfigError(field, arr, f"a boolean array of shape {tuple(shape)}")
    return arr.astype(bool, copy=False)


def _overlap_matrix(n_src: int, pitch_src: float, n_dst: int, pitch_dst: float) -> sp.csr_matrix:
    """Fraction of each destination sample covered by each source sample (1-D, concentric)."""
    edges = (np.arange(n_dst + 1) - n_dst // 2 - 0.5) * pitch_dst
    start = (-(n_src // 2) - 0.5) * pitch_src
    return interval_overlap(edges, start, pitch_src, n_src).astype(np.float32)


def resample_coverage(values: np.ndarray, src: RetinalGrid, dst: RetinalGrid) -> np.ndarray:
    """Area-weighted resampling between two concentric retinal grids.

    Each destination sample gets the area-weighted mean of the source
    samples it overlaps (source samples are taken as uniform squares).

    Returns
    -------
    ndarray, float32, shape ``dst.shape``

    References
    ----------
    .. [1] common practice: area-weighted (conservative) resampling between nested grids.
    """
    wy = _overlap_matrix(src.rows, src.pitch_y_um, dst.rows, dst.pitch_y_um).tocsr()
    wx = _overlap_matrix(src.cols, src.pitch_x_um, dst.cols, dst.pitch_x_um).tocsr()
    vals = np.ascontiguousarray(values, dtype=np.float32)
    tmp = np.empty((dst.rows, src.cols), dtype=np.float32)
    _combine_rows(wy.indptr, wy.indices, wy.data, vals, tmp)
    out = np.empty(dst.shape, dtype=np.float32)
    _combine_cols(wx.indptr, wx.indices, wx.data, tmp, out)
    return out


# Single-threaded: called from the threads of a batch as well.
@nb.njit(cache=True, nogil=True)
def _combine_rows(indptr, indices, data, values, out):  # pragma: no cover - compiled
    """``out[i, :] = sum_k data[k] * values[indices[k], :]`` over row ``i`` of a CSR matrix."""
    out[:] = 0.0
    for i in range(out.shape[0]):
        for k in range(indptr[i], indptr[i + 1]):
            w = data[k]
            src = indices[k]
            for c in range(out.shape[1]):
                out[i, c] += w * values[src, c]


@nb.njit(cache=True, nogil=True)
def _combine_cols(indptr, indices, data, values, out):  # pragma: no cover - compiled
    """``out[:, j] = sum_l data[l] * values[:, indices[l]]`` over row ``j`` of a CSR matrix."""
    for i in range(out.shape[0]):
        for j in range(out.shape[1]):
            acc = np.float32(0.0)
            for k in range(indptr[j], indptr[j + 1]):
                acc += data[k] * values[i, indices[k]]
            out[i, j] = acc

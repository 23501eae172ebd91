"""Sampling grids on the retina.

One place converts between array indices ``[row, col]`` and retinal
coordinates in micrometres. The origin is the optical axis, where the zero
order lands; x grows to the right (with the column) and y grows upwards
(against the row). The centre sample is ``[rows // 2, cols // 2]``, which is
where a centred (``fftshift``-ed) discrete Fourier transform puts zero
frequency.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from . import validate

__all__ = ["RetinalGrid", "interval_overlap"]


def interval_overlap(
    edges_out: np.ndarray, start_in: float, step_in: float, n_in: int
) -> sp.csr_matrix:
    """Fraction of each output interval covered by each input interval (1-D, sparse).

    Output intervals ``[edges_out[k], edges_out[k+1]]`` (increasing), input
    intervals ``[start_in + j step_in, start_in + (j+1) step_in]``; the weight
    is the overlap length over the output interval's length. Area-weighted
    resampling in 2-D is ``W_rows @ values @ W_cols.T``.
    """
    edges = np.asarray(edges_out, dtype=np.float64)
    lo, hi = edges[:-1], edges[1:]
    length = hi - lo
    j0 = np.floor((lo - start_in) / step_in).astype(np.int64)
    k = int(math.ceil(np.max(length) / step_in)) + 2
    j = j0[:, None] + np.arange(k)
    a = np.maximum(lo[:, None], start_in + j * step_in)
    b = np.minimum(hi[:, None], start_in + (j + 1) * step_in)
    w = np.clip(b - a, 0.0, None) / length[:, None]
    ok = (w > 1e-12) & (j >= 0) & (j < n_in)
    rows = np.broadcast_to(np.arange(len(lo))[:, None], j.shape)[ok]
    return sp.csr_matrix((w[ok], (rows, j[ok])), shape=(len(lo), n_in))


@dataclass(frozen=True)
class RetinalGrid:
    """A rectangular grid of samples on the retina.

    Parameters
    ----------
    shape : tuple of int
        ``(rows, cols)``.
    pitch_x_um, pitch_y_um : float
        Sample spacing along x (columns) and y (rows), in micrometres.
    """

    shape: tuple[int, int]
    pitch_x_um: float
    pitch_y_um: float

    def __post_init__(self) -> None:
        if len(self.shape) != 2:
            raise validate.ConfigError("grid.shape", self.shape, "(rows, cols)")
        rows = validate.integer("grid.shape[0]", self.shape[0], lo=1)
        cols = validate.integer("grid.shape[1]", self.shape[1], lo=1)
        object.__setattr__(self, "shape", (rows, cols))
        object.__setattr__(
            self,
            "pitch_x_um",
            validate.number("grid.pitch_x_um", self.pitch_x_um, lo=0, lo_open=True),
        )
        object.__setattr__(
            self,
            "pitch_y_um",
            validate.number("grid.pitch_y_um", self.pitch_y_um, lo=0, lo_open=True),
        )

    @property
    def rows(self) -> int:
        return self.shape[0]

    @property
    def cols(self) -> int:
        return self.shape[1]

    @property
    def centre_index(self) -> tuple[int, int]:
        """Index ``(row, col)`` of the optical axis."""
        return self.shape[0] // 2, self.shape[1] // 2

    @property
    def x_um(self) -> np.ndarray:
        """x coordinate of each column centre, micrometres (float64)."""
        return (np.arange(self.cols) - self.cols // 2) * self.pitch_x_um

    @property
    def y_um(self) -> np.ndarray:
        """y coordinate of each row centre, micrometres (decreasing with row)."""
        return (self.rows // 2 - np.arange(self.rows)) * self.pitch_y_um

    @property
    def sample_area_um2(self) -> float:
        """Area of one sample, square micrometres."""
        return self.pitch_x_um * self.pitch_y_um

    @property
    def sample_area_mm2(self) -> float:
        """Area of one sample, square millimetres."""
        return self.sample_area_um2 * 1e-6

    @property
    def width_um(self) -> float:
        """Full width of the grid along x, micrometres."""
        return self.cols * self.pitch_x_um

    @property
    def height_um(self) -> float:
        """Full height of the grid along y, micrometres."""
        return self.rows * self.pitch_y_um

    @property
    def extent_um(self) -> tuple[float, float, float, float]:
        """``(x_min, x_max, y_min, y_max)`` of the sample edges, micrometres."""
        x, y = self.x_um, self.y_um
        hx, hy = self.pitch_x_um / 2, self.pitch_y_um / 2
        return (x[0] - hx, x[-1] + hx, y[-1] - hy, y[0] + hy)

    @property
    def origin_um(self) -> tuple[float, float]:
        """Retinal ``(y, x)`` of sample ``[0, 0]``, for viewers whose y axis points down.

        napari and matplotlib ``imshow`` place row 0 at the top; with a scale
        of ``(pitch_y_um, pitch_x_um)`` and this translate, the displayed
        coordinates are ``(-y, x)``.
        """
        return (-self.y_um[0], self.x_um[0])

    def coords_um(self) -> tuple[np.ndarray, np.ndarray]:
        """Broadcastable ``(X, Y)`` in micrometres, shapes ``(1, cols)`` and ``(rows, 1)``."""
        return self.x_um[np.newaxis, :], self.y_um[:, np.newaxis]

    def index_of(self, x_um: float, y_um: float) -> tuple[float, float]:
        """Fractional ``(row, col)`` of a retinal point."""
        col = x_um / self.pitch_x_um + self.cols // 2
        row = self.rows // 2 - y_um / self.pitch_y_um
        return row, col

    def point_of(self, row: float, col: float) -> tuple[float, float]:
        """Retinal ``(x_um, y_um)`` of a fractional index."""
        return (col - self.cols // 2) * self.pitch_x_um, (self.rows // 2 - row) * self.pitch_y_um

    def refined(self, factor: int) -> RetinalGrid:
        """The concentric grid with ``factor`` times more samples per axis."""
        factor = validate.integer("oversample", factor, lo=1)
        return RetinalGrid(
            (self.rows * factor, self.cols * factor),
            self.pitch_x_um / factor,
            self.pitch_y_um / factor,
        )

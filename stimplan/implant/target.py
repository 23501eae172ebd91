"""Implant-aware targets: light only where the photodiodes of ON pixels are.

Light between photodiodes is wasted, so a target built from the implant has
three regions on the design grid:

* **signal**: the active areas of ON pixels (lit) and of OFF pixels (dark);
* **free**: trenches, the rest of each cell and everything outside the array
  (the MRAF noise region);

and one group label per sample, the implant pixel whose photodiode covers
it, for the pixel-domain weighting that equalises the power of ON pixels.

References
----------
.. [1] M. Pasienski and B. DeMarco, *Opt. Express* 16, 2176 (2008) (MRAF
   signal and noise regions).
.. [2] R. Di Leonardo, F. Ianni and G. Ruocco, *Opt. Express* 15, 1913 (2007)
   (weights per controlled spot, here per implant pixel).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid
from ..optics.target import Target

__all__ = ["PixelStates", "pixel_states", "implant_target"]


@dataclass(frozen=True)
class PixelStates:
    """Which implant pixels a stimulus turns on.

    Attributes
    ----------
    level : ndarray, float
        Mean stimulus value (0..1) over each pixel's cell.
    on : ndarray of bool
        ``level >= threshold``.
    threshold : float
    """

    level: np.ndarray
    on: np.ndarray
    threshold: float

    @property
    def n_on(self) -> int:
        return int(self.on.sum())


def pixel_states(
    intensity: np.ndarray, grid: RetinalGrid, implant, *, threshold: float = 0.5
) -> PixelStates:
    """Mean stimulus over each implant pixel's cell, and the ON pixels.

    Parameters
    ----------
    intensity : ndarray
        Stimulus in [0, 1] on ``grid``.
    grid : RetinalGrid
    implant : Implant
    threshold : float
        A pixel is ON when its cell's mean stimulus is at least this, in (0, 1].

    References
    ----------
    .. [1] H. Lorach et al., *Nat. Med.* 21, 476 (2015) (pixels as the sampling unit of prosthetic
       vision).
    """
    thr = validate.number("implant_target.threshold", threshold, lo=0, hi=1, lo_open=True)
    t = validate.finite_array("stimulus", intensity, shape=grid.shape, lo=0.0, hi=1.0)
    cells = implant.rasterize(grid, "cell").matrix
    area = np.asarray(cells.sum(axis=1)).ravel()
    level = (cells @ t.reshape(-1).astype(np.float64)) / np.where(area > 0, area, 1.0)
    return PixelStates(level=level, on=level >= thr, threshold=thr)


def implant_target(
    intensity: np.ndarray,
    grid: RetinalGrid,
    implant,
    *,
    threshold: float = 0.5,
    graded: bool = False,
    name: str = "implant-aware",
) -> Target:
    """A target that lights the photodiodes of the pixels a stimulus turns on.

    Parameters
    ----------
    intensity : ndarray
        Stimulus in [0, 1] on ``grid`` (the design grid).
    grid : RetinalGrid
        Design grid of the optical system.
    implant : Implant
        Must fit inside the grid.
    threshold : float
        Cell-mean stimulus at which a pixel is ON.
    graded : bool
        Light ON pixels in proportion to their cell-mean stimulus instead of
        all at full level.
    name : str

    Returns
    -------
    Target
        ``intensity`` = photodiode coverage (0..1) × pixel level on ON pixels;
        ``signal`` = samples touched by any photodiode; ``free`` = the rest;
        ``groups`` = pixel number of each photodiode sample (-1 elsewhere).

    Raises
    ------
    ConfigError
        If no pixel is ON.

    References
    ----------
    .. [1] M. Pasienski and B. DeMarco, *Opt. Express* 16, 2176 (2008) (signal and noise regions).
    """
    states = pixel_states(intensity, grid, implant, threshold=threshold)
    if states.n_on == 0:
        raise ConfigError(
            "stimulus",
            "no implant pixel on",
            f"a stimulus whose cell mean reaches {states.threshold:g} on at least one pixel",
        )
    raster = implant.rasterize(grid, "active")
    m = raster.matrix.tocoo()
    n = grid.rows * grid.cols
    level = np.where(states.on, states.level if graded else 1.0, 0.0)
    lit = np.bincount(m.col, weights=m.data * level[m.row], minlength=n)
    touched = np.bincount(m.col, weights=m.data, minlength=n) > 0
    groups = raster.label_image(threshold=1e-6).reshape(-1)
    t = np.clip(lit, 0.0, 1.0).astype(np.float32).reshape(grid.shape)
    signal = touched.reshape(grid.shape)
    return Target(
        intensity=t,
        grid=grid,
        signal=signal,
        free=~signal,
        groups=groups.reshape(grid.shape),
        name=name,
    )

"""Stimuli from image files (PNG, TIFF), scaled to retinal micrometres.

The file is read once, when the stimulus is made, through
:func:`stimplan.io_images.read_scalar_image` (size limit, Pillow's
decompression-bomb guard on). Colour images become luminance. Grey values
are scaled to [0, 1]: integer images by the largest value of their type
(255 for 8 bit, 65535 for 16 bit), boolean images as 0/1; floating-point
images must already lie in [0, 1].

The image is a piecewise-constant pattern of square image pixels,
``width_um / columns`` on a side, row 0 at the top. Unrotated, it is
resampled exactly by area (each sample gets the area-weighted mean of the
image pixels it overlaps); rotated, by ``4 × 4`` supersampling.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .. import validate
from ..errors import InputFileError
from ..grid import RetinalGrid, interval_overlap
from ..io_images import read_scalar_image
from .base import DEFAULT_SUPERSAMPLE, Figure, check_grid, positive, register

__all__ = ["ImageStimulus", "MAX_STIMULUS_IMAGE_PIXELS", "IMAGE_SUFFIXES"]

#: Largest image accepted as a stimulus, pixels.
MAX_STIMULUS_IMAGE_PIXELS = 4096 * 4096
IMAGE_SUFFIXES = (".png", ".tif", ".tiff")
_ROTATED_SUPERSAMPLE = 4


def _normalised(field: str, path: str, arr: np.ndarray) -> np.ndarray:
    if arr.dtype == np.bool_:
        return arr.astype(np.float32)
    if arr.dtype.kind in "ui":
        info = np.iinfo(arr.dtype)
        if arr.dtype.kind == "i" and arr.size and int(arr.min()) < 0:
            raise InputFileError(field, path, "grey values >= 0", f"minimum {int(arr.min())}")
        return (arr.astype(np.float32) / np.float32(info.max)).astype(np.float32)
    out = arr.astype(np.float32)
    if out.size and (float(out.min()) < 0.0 or float(out.max()) > 1.0):
        raise InputFileError(
            field,
            path,
            "floating-point grey values in [0, 1]",
            f"range [{float(out.min()):g}, {float(out.max()):g}]",
        )
    return out


@register
@dataclass(frozen=True, kw_only=True)
class ImageStimulus(Figure):
    """An image from a PNG or TIFF file.

    Parameters
    ----------
    path : str
        The file (``.png``, ``.tif`` or ``.tiff``).
    width_um : float
        Width of the image on the retina, µm, > 0; the height follows from
        the aspect ratio.
    max_pixels : int
        Largest accepted image, pixels.
    contrast, polarity, center_x_um, center_y_um, rotation_deg
        See :class:`~stimplan.stimuli.base.Figure`; grey value 1 is the
        figure level and 0 the ground level.

    Raises
    ------
    InputFileError
        If the file is missing, not an image, too large, or holds values out
        of range.
    """

    kind = "image"

    path: str
    width_um: float
    max_pixels: int = MAX_STIMULUS_IMAGE_PIXELS

    def __post_init__(self) -> None:
        super().__post_init__()
        f = object.__setattr__
        if not isinstance(self.path, (str, Path)):
            raise InputFileError("image.path", self.path, "a file path")
        path = str(self.path)
        f(self, "path", path)
        f(self, "width_um", positive(self.kind, "width_um", self.width_um))
        f(self, "max_pixels", validate.integer("image.max_pixels", self.max_pixels, lo=1))
        if Path(path).suffix.lower() not in IMAGE_SUFFIXES:
            raise InputFileError(
                "image.path", path, "a file ending in " + ", ".join(IMAGE_SUFFIXES)
            )
        arr = read_scalar_image("image.path", path, max_pixels=self.max_pixels)
        pixels = _normalised("image.path", path, arr)
        pixels.setflags(write=False)
        f(self, "_pixels", pixels)

    @property
    def pixels(self) -> np.ndarray:
        """The grey values in [0, 1], float32 (rows, cols), read-only."""
        return self._pixels  # type: ignore[attr-defined]

    @property
    def image_shape(self) -> tuple[int, int]:
        return self.pixels.shape  # type: ignore[return-value]

    @property
    def pixel_um(self) -> float:
        """Side of one image pixel on the retina, µm."""
        return self.width_um / self.image_shape[1]

    @property
    def height_um(self) -> float:
        """Height of the image on the retina, µm."""
        return self.pixel_um * self.image_shape[0]

    def _local_bbox(self) -> tuple[float, float, float, float]:
        a, b = self.width_um / 2.0, self.height_um / 2.0
        return (-a, a, -b, b)

    def coverage(self, grid: RetinalGrid, *, supersample: int = DEFAULT_SUPERSAMPLE) -> np.ndarray:
        """Area-weighted grey values on ``grid``, float32 in [0, 1] (0 outside the image)."""
        grid = check_grid(grid)
        out = np.zeros(grid.shape, dtype=np.float32)
        win = self._window(grid)
        if win is None:
            return out
        r0, r1, c0, c1 = win
        px, py = grid.pitch_x_um, grid.pitch_y_um
        xs, ys = grid.x_um[c0:c1], grid.y_um[r0:r1]
        img = self.pixels
        rows_img, cols_img = img.shape
        step = self.pixel_um
        if self.rotation_deg % 360.0 == 0.0:
            x_edges = np.append(xs - px / 2.0, xs[-1] + px / 2.0) - self.center_x_um
            # rows run downwards: measure from the top, growing downwards
            y_edges = self.center_y_um - np.append(ys + py / 2.0, ys[-1] - py / 2.0)
            wx = interval_overlap(x_edges, -self.width_um / 2.0, step, cols_img)
            wy = interval_overlap(y_edges, -self.height_um / 2.0, step, rows_img)
            part = wy @ (wx @ img.T.astype(np.float64)).T
            out[r0:r1, c0:c1] = np.clip(part, 0.0, 1.0)
            return out
        s = _ROTATED_SUPERSAMPLE
        off = (np.arange(s) + 0.5) / s - 0.5
        acc = np.zeros((r1 - r0, c1 - c0), dtype=np.float32)
        for oy in off * py:
            for ox in off * px:
                u, w = self._to_local(xs[np.newaxis, :] + ox, ys[:, np.newaxis] + oy)
                col = np.floor((u + self.width_um / 2.0) / step).astype(np.int64)
                row = np.floor((self.height_um / 2.0 - w) / step).astype(np.int64)
                ok = (col >= 0) & (col < cols_img) & (row >= 0) & (row < rows_img)
                acc += np.where(
                    ok, img[np.clip(row, 0, rows_img - 1), np.clip(col, 0, cols_img - 1)], 0
                )
        out[r0:r1, c0:c1] = acc / np.float32(s * s)
        return out

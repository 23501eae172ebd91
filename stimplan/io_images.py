"""Bounded reading of image files (PNG, TIFF, NumPy).

Pillow's decompression-bomb guard stays on, and a size limit applies to
every image read, so that a wrong file cannot exhaust memory.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from .errors import InputFileError

__all__ = ["read_scalar_image", "MAX_IMAGE_PIXELS"]

#: Largest image (pixels) that stimplan reads.
MAX_IMAGE_PIXELS = 8192 * 8192


def read_scalar_image(
    field: str,
    path: str | Path | None,
    *,
    shape: tuple[int, int] | None = None,
    max_pixels: int = MAX_IMAGE_PIXELS,
) -> np.ndarray:
    """Read a single-channel 2-D image from PNG, TIFF or ``.npy``.

    Parameters
    ----------
    field : str
        Field path for error messages.
    path : str or Path
        The file.
    shape : tuple of int, optional
        Required ``(rows, cols)``.
    max_pixels : int
        Largest accepted number of pixels.

    Returns
    -------
    ndarray
        The image in its stored dtype (colour images are converted to
        luminance, float32).

    Raises
    ------
    InputFileError
        If the file is missing, not an image, too large or of the wrong shape.
    """
    if path is None:
        raise InputFileError(field, None, "an image file path")
    p = Path(path)
    if not p.is_file():
        raise InputFileError(field, str(p), "an existing image file", "no such file")
    suffix = p.suffix.lower()
    try:
        if suffix == ".npy":
            arr = np.load(p, mmap_mode="r", allow_pickle=False)
            if arr.size > max_pixels:
                raise InputFileError(field, str(p), f"at most {max_pixels} pixels")
            arr = np.array(arr)
        elif suffix in (".tif", ".tiff"):
            import tifffile

            with tifffile.TiffFile(p) as tif:
                page = tif.pages[0]
                n = int(np.prod(page.shape))
                if n > max_pixels:
                    raise InputFileError(field, str(p), f"at most {max_pixels} pixels")
                arr = page.asarray()
        else:
            from PIL import Image

            with Image.open(p) as img:
                if img.width * img.height > max_pixels:
                    raise InputFileError(field, str(p), f"at most {max_pixels} pixels")
                if img.mode in ("RGB", "RGBA", "P", "LA", "CMYK", "YCbCr"):
                    img = img.convert("L")
                arr = np.asarray(img)
    except InputFileError:
        raise
    except Exception as exc:
        raise InputFileError(
            field,
            str(p),
            "a readable PNG, TIFF or .npy image",
            type(exc).__name__ + ": " + str(exc),
        ) from None
    if arr.ndim == 3 and arr.shape[-1] in (3, 4):
        arr = arr[..., :3].astype(np.float32) @ np.array([0.299, 0.587, 0.114], np.float32)
    if arr.ndim != 2:
        raise InputFileError(field, str(p), "a single-channel 2-D image", f"shape {arr.shape}")
    if arr.dtype.kind not in "biuf":
        raise InputFileError(field, str(p), "a numeric image", f"dtype {arr.dtype}")
    if shape is not None and tuple(arr.shape) != tuple(shape):
        raise InputFileError(field, str(p), f"an image of shape {tuple(shape)}", f"got {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise InputFileError(field, str(p), "finite pixel values")
    return arr

"""Phase quantisation and the grey-level lookup of an SLM.

An SLM with ``L`` phase levels shows level ``k`` as the phase ``2πk/L``
(linear drive) or as the measured phase of the grey value that a
calibration table assigns to it.

References
----------
.. [1] G. J. Swanson, "Binary optics technology: the theory and design of
   multi-level diffractive optical elements", MIT Lincoln Laboratory,
   Technical Report 854 (1989).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numba as nb
import numpy as np

from .. import validate
from ..errors import ConfigError, InputFileError

__all__ = ["GreyLevelMap", "quantize_phase", "level_dtype"]

TWO_PI = 2.0 * np.pi


def level_dtype(n_values: int) -> np.dtype:
    """Smallest unsigned integer type that holds ``n_values`` distinct values (uint8 or uint16)."""
    return np.dtype(np.uint8) if n_values <= 256 else np.dtype(np.uint16)


def quantize_phase(phase_rad: np.ndarray, levels: int) -> np.ndarray:
    """Round a phase map to the nearest of ``levels`` equally spaced levels.

    Parameters
    ----------
    phase_rad : ndarray
        Phase in radians (any range; it is wrapped to [0, 2π)).
    levels : int
        Number of phase levels, >= 2.

    Returns
    -------
    ndarray of uint8 or uint16
        Level index ``k`` in ``[0, levels)``; level ``k`` stands for ``2πk/levels``.

    References
    ----------
    .. [1] Swanson (1989), §2: a staircase of ``L`` levels approximating a
       blazed ramp.
    """
    levels = validate.integer("slm.phase_levels", levels, lo=2, hi=65536)
    phase = np.ascontiguousarray(phase_rad, dtype=np.float32)
    out = np.empty(phase.shape, dtype=level_dtype(levels))
    _quantize(phase.reshape(-1), np.float32(levels / TWO_PI), levels, out.reshape(-1))
    return out


@nb.njit(cache=True, nogil=True)
def _quantize(phase, scale, levels, out):  # pragma: no cover - compiled
    """``out = mod(rint(phase * scale), levels)`` (float32 product, round half to even)."""
    for k in range(phase.size):
        q = np.int64(np.rint(phase[k] * scale)) % levels
        out[k] = q


@dataclass(frozen=True)
class GreyLevelMap:
    """Lookup from phase levels to the grey values sent to the SLM.

    Parameters
    ----------
    level_grey : ndarray of int, shape (L,)
        Grey value shown for level ``k``.
    level_phase_rad : ndarray of float, shape (L,)
        Phase that level ``k`` really produces (``2πk/L`` for a linear drive).
    """

    level_grey: np.ndarray
    level_phase_rad: np.ndarray

    def __post_init__(self) -> None:
        g = np.asarray(self.level_grey)
        p = np.asarray(self.level_phase_rad, dtype=np.float32)
        if g.ndim != 1 or g.size < 2 or p.shape != g.shape:
            raise ConfigError(
                "slm.lut", g.shape, "matching 1-D grey and phase tables of >= 2 entries"
            )
        if g.min() < 0 or g.max() > 65535:
            raise ConfigError("slm.lut", int(g.max()), "grey values in [0, 65535]")
        object.__setattr__(self, "level_grey", g.astype(level_dtype(int(g.max()) + 1)))
        object.__setattr__(self, "level_phase_rad", p)

    @property
    def levels(self) -> int:
        return int(self.level_grey.size)

    @property
    def dtype(self) -> np.dtype:
        """Type of the grey images (uint8 when every grey value fits, else uint16)."""
        return self.level_grey.dtype

    @classmethod
    def linear(cls, levels: int, grey_2pi: int | None = None) -> GreyLevelMap:
        """Linear drive: level ``k`` shown as ``round(k * grey_2pi / levels)``.

        Parameters
        ----------
        levels : int
            Number of phase levels.
        grey_2pi : int, optional
            Grey value that would give 2π; defaults to ``levels``.
        """
        levels = validate.integer("slm.phase_levels", levels, lo=2, hi=65536)
        g2 = (
            levels
            if grey_2pi is None
            else validate.integer("slm.grey_2pi", grey_2pi, lo=1, hi=65536)
        )
        k = np.arange(levels)
        grey = np.rint(k * (g2 / levels)).astype(np.int64)
        if np.unique(grey).size != levels:
            raise ConfigError(
                "slm.grey_2pi", g2, f">= {levels} so that every phase level has its own grey value"
            )
        return cls(grey, (TWO_PI * k / levels).astype(np.float32))

    @classmethod
    def from_table(cls, path: str | Path, levels: int) -> GreyLevelMap:
        """Measured lookup from a two-column file ``grey, phase_rad``.

        Each level ``k`` gets the grey whose measured phase is nearest to
        ``2πk/levels`` modulo 2π; the realised phase is that measured phase.

        Parameters
        ----------
        path : str or Path
            CSV or whitespace-separated text; a header line is allowed.
        levels : int
            Number of phase levels to serve.
        """
        levels = validate.integer("slm.phase_levels", levels, lo=2, hi=65536)
        p = Path(path)
        try:
            text = p.read_text()
        except (OSError, UnicodeDecodeError) as exc:
            raise InputFileError("slm.lut_file", str(p), "a readable text file", str(exc)) from None
        rows = []
        for n, line in enumerate(text.splitlines(), start=1):
            line = line.strip()
            if not line or line.startswith("#"):
                continue
            parts = line.replace(",", " ").split()
            try:
                rows.append((float(parts[0]), float(parts[1])))
            except (ValueError, IndexError):
                if rows:  # a header is only allowed first
                    raise InputFileError(
                        "slm.lut_file", line, "two numbers per line: grey, phase_rad", line=n
                    ) from None
        if len(rows) < 2:
            raise InputFileError("slm.lut_file", str(p), "at least two rows of grey, phase_rad")
        table = np.asarray(rows, dtype=np.float64)
        if not np.all(np.isfinite(table)):
            raise InputFileError("slm.lut_file", str(p), "finite numbers")
        grey, phase = table[:, 0], table[:, 1]
        if np.any(grey < 0) or np.any(grey > 65535) or np.any(grey != np.rint(grey)):
            raise InputFileError("slm.lut_file", str(p), "integer grey values in [0, 65535]")
        wanted = TWO_PI * np.arange(levels) / levels
        diff = np.angle(np.exp(1j * (phase[np.newaxis, :] - wanted[:, np.newaxis])))
        best = np.argmin(np.abs(diff), axis=1)
        if np.unique(best).size != levels:
            raise InputFileError(
                "slm.lut_file",
                str(p),
                f"a table that resolves {levels} distinct phase levels",
                "several levels map to the same grey value",
            )
        return cls(grey[best].astype(np.int64), np.mod(phase[best], TWO_PI).astype(np.float32))

    def to_grey(self, level_index: np.ndarray) -> np.ndarray:
        """Grey image for an image of level indices."""
        return self.level_grey[level_index]

    def levels_from_grey(self, grey: np.ndarray) -> np.ndarray:
        """Level indices for a grey image (inverse of :meth:`to_grey`).

        Raises
        ------
        ConfigError
            If the image holds a grey value that no level uses.
        """
        lut = np.full(int(self.level_grey.max()) + 1, -1, dtype=np.int64)
        lut[self.level_grey.astype(np.int64)] = np.arange(self.levels)
        g = np.asarray(grey).astype(np.int64)
        if g.size and (g.min() < 0 or g.max() >= lut.size or np.any(lut[g] < 0)):
            raise ConfigError("hologram.grey", grey, "grey values of the SLM's lookup table")
        return lut[g].astype(level_dtype(self.levels))

    def phase_of_levels(self, level_index: np.ndarray) -> np.ndarray:
        """Realised phase in radians (float32) of an image of level indices."""
        return self.level_phase_rad[level_index]


def grey_map_for(slm) -> GreyLevelMap:
    """The :class:`GreyLevelMap` an :class:`~stimplan.optics.system.SLM` describes."""
    if slm.lut_file:
        return GreyLevelMap.from_table(slm.lut_file, slm.phase_levels)
    return GreyLevelMap.linear(slm.phase_levels, slm.grey_2pi)

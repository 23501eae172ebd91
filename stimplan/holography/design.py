"""From a target to the grey levels an SLM shows.

:func:`design_hologram` runs an IFTA on the target with the real beam
profile, places the pattern off axis with a blazed-grating (linear phase)
term if asked, adds the Fresnel lens term and the measured correction phase,
quantises to the SLM's levels and maps the levels to grey values.

References
----------
.. [1] J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed., §4.2 and
   the Fourier shift theorem, §2.1.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace

import numba as nb
import numpy as np

from .. import validate
from ..errors import ConfigError
from ..optics.target import Target
from .ifta import IftaSettings, run_ifta
from .propagation import RetinalPrediction, pixel_aperture_envelope, predict_retina
from .quantize import GreyLevelMap, grey_map_for, quantize_phase

__all__ = [
    "Hologram",
    "design_hologram",
    "linear_phase_ramp",
    "add_phase_ramp",
    "offset_to_samples",
]

TWO_PI = np.float32(2 * np.pi)


def linear_phase_ramp(shape: tuple[int, int], shift_rows: float, shift_cols: float) -> np.ndarray:
    """Phase (radians, float32) that translates the far field by whole or fractional samples.

    Multiplying the SLM field by ``exp(2πi (c x/N_x + r y/N_y))`` moves the
    centred far field by ``r`` rows and ``c`` columns (Fourier shift theorem);
    this is a blazed grating.

    References
    ----------
    .. [1] Goodman (2005), §2.1.3, shift theorem.
    """
    ny, nx = shape
    r = (np.arange(ny, dtype=np.float64) - ny // 2) * (shift_rows / ny)
    c = (np.arange(nx, dtype=np.float64) - nx // 2) * (shift_cols / nx)
    ramp = np.mod(r[:, np.newaxis] + c[np.newaxis, :], 1.0) * (2 * np.pi)
    return ramp.astype(np.float32)


def add_phase_ramp(phase_rad: np.ndarray, shift_rows: float, shift_cols: float) -> np.ndarray:
    """``mod(phase_rad + linear_phase_ramp(...), 2π)`` in one pass (float32, a new array).

    References
    ----------
    .. [1] Goodman (2005), §2.1.3, shift theorem.
    """
    phase = np.ascontiguousarray(phase_rad, dtype=np.float32)
    if phase.ndim != 2:
        raise ConfigError("phase_rad", phase, "a 2-D phase map")
    ny, nx = phase.shape
    r = (np.arange(ny, dtype=np.float64) - ny // 2) * (float(shift_rows) / ny)
    c = (np.arange(nx, dtype=np.float64) - nx // 2) * (float(shift_cols) / nx)
    out = np.empty_like(phase)
    _add_ramp(phase, r, c, out)
    return out


@nb.njit(cache=True, nogil=True)
def _add_ramp(phase, r, c, out):  # pragma: no cover - compiled
    two_pi = np.float32(2 * np.pi)
    for i in range(phase.shape[0]):
        for j in range(phase.shape[1]):
            x = r[i] + c[j]
            ramp = np.float32((x - np.floor(x)) * (2 * np.pi))
            y = phase[i, j] + ramp
            y = y - np.floor(y / two_pi) * two_pi
            if y < 0:  # float32 rounding at the wrap
                y += two_pi
            if y >= two_pi:
                y -= two_pi
            out[i, j] = y


def offset_to_samples(offset_um: tuple[float, float], grid) -> tuple[int, int]:
    """Retinal offset ``(x_um, y_um)`` as whole design samples ``(rows, cols)``."""
    if len(offset_um) != 2:
        raise ConfigError("offset_um", offset_um, "a pair (x_um, y_um)")
    x = validate.number("offset_um[0]", offset_um[0])
    y = validate.number("offset_um[1]", offset_um[1])
    return int(round(-y / grid.pitch_y_um)), int(round(x / grid.pitch_x_um))


@dataclass(frozen=True)
class Hologram:
    """A computed hologram.

    Attributes
    ----------
    phase_rad : ndarray, float32
        Designed phase in [0, 2π), with the off-axis term, without the lens
        and correction terms.
    levels : ndarray, uint8 or uint16
        Level index shown on each SLM pixel (lens and correction included).
    grey : ndarray, uint8 or uint16
        Grey values sent to the SLM.
    target : Target
        The target at its place on the retina (after the off-axis shift).
    settings : IftaSettings
    offset_samples : tuple of int
        Off-axis shift, design samples ``(rows, cols)``.
    lit_fraction_history : ndarray
        Design-grid efficiency per iteration.
    group_weights : ndarray or None
        Final pixel-domain weights.
    reused_from : str or None
        Name of the target whose hologram this one translates (no IFTA of its own).
    """

    phase_rad: np.ndarray
    levels: np.ndarray
    grey: np.ndarray
    target: Target
    settings: IftaSettings
    offset_samples: tuple[int, int]
    lit_fraction_history: np.ndarray
    group_weights: np.ndarray | None = None
    reused_from: str | None = None

    def displayed_phase_rad(self, lut: GreyLevelMap) -> np.ndarray:
        """Realised phase of the displayed levels, radians."""
        return lut.phase_of_levels(self.levels)

    def predict(
        self,
        system,
        *,
        oversample: int = 2,
        workers: int = -1,
        signal_region: np.ndarray | None = None,
        focus_error_rad: np.ndarray | None = None,
        source_blur: bool = True,
    ) -> RetinalPrediction:
        """Predicted retina for this hologram on ``system``.

        The signal region of the power account is the target's lit area
        (``signal_region``, if the caller has it on the prediction grid already).
        ``focus_error_rad`` is the phase of an error of the eye's focus
        (:func:`stimplan.optics.aberration.focus_error_phase_rad`); ``source_blur=False``
        predicts without the source's blur (:func:`predict_retina`).
        """
        lut = grey_map_for(system.slm)
        if signal_region is None:
            grid = system.prediction_grid(oversample)
            region = self.target.region_on(grid, "lit")
        else:
            region = signal_region
        return predict_retina(
            self.displayed_phase_rad(lut),
            system,
            oversample=oversample,
            signal_region=region,
            focus_error_rad=focus_error_rad,
            source_blur=source_blur,
            workers=workers,
        )


def display_levels(phase_rad: np.ndarray, system) -> np.ndarray:
    """Level indices for a designed phase: adds the lens and correction terms, quantises."""
    total = phase_rad
    lens = system.fresnel_phase_rad()
    corr = system.illumination.correction_phase_rad(system.slm)
    if lens is not None or corr is not None:
        total = phase_rad.copy()
        if lens is not None:
            total += lens
        if corr is not None:
            total += corr
    return quantize_phase(total, system.slm.phase_levels)


def design_hologram(
    target: Target,
    system,
    settings: IftaSettings | None = None,
    *,
    offset_um: tuple[float, float] = (0.0, 0.0),
    initial_phase_rad: np.ndarray | None = None,
    compensate_envelope: bool = True,
    progress: Callable[[int], None] | None = None,
    workers: int = -1,
) -> Hologram:
    """Compute the hologram that forms ``target`` on the retina through ``system``.

    Parameters
    ----------
    target : Target
        On ``system.design_grid()``.
    system : OpticalSystem
    settings : IftaSettings
    offset_um : tuple of float
        Off-axis window: move the pattern by ``(x, y)`` µm on the retina with a
        blazed-grating term, e.g. to clear the zero order. Rounded to whole
        design samples; the shifted pattern must stay inside the steerable
        field.
    initial_phase_rad : ndarray, optional
        Start phase (before the off-axis term).
    compensate_envelope : bool
        Divide the target by the pixel-aperture ``sinc²`` envelope at its
        final place, so that the pattern on the retina, not the bare far
        field, matches the target.
    progress : callable, optional
        Called with the iteration count.
    workers : int
        FFT threads.

    Returns
    -------
    Hologram

    References
    ----------
    .. [1] R. W. Gerchberg and W. O. Saxton, *Optik* 35, 237 (1972); M. Pasienski and B. DeMarco,
       *Opt. Express* 16, 2176 (2008); J. W. Goodman, *Introduction to Fourier Optics*, 3rd ed.
       (2005), §2.1.3 (shift theorem).
    """
    st = settings or IftaSettings()
    grid = system.design_grid()
    if target.grid.shape != grid.shape or not np.isclose(
        target.grid.pitch_x_um, grid.pitch_x_um, rtol=1e-6
    ):
        raise ConfigError(
            "target.grid",
            f"{target.grid.shape} @ {target.grid.pitch_x_um:.3f} µm",
            f"the system's design grid {grid.shape} @ {grid.pitch_x_um:.3f} µm",
        )
    rows, cols = offset_to_samples(offset_um, grid)
    placed = target.shifted(rows, cols) if (rows or cols) else target
    amp = system.illumination.amplitude(system.slm)
    design_target = target
    if compensate_envelope:
        design_target = _envelope_compensated(target, system, rows, cols)
    res = run_ifta(
        design_target,
        amp,
        st,
        phase_levels=system.slm.phase_levels,
        initial_phase_rad=initial_phase_rad,
        progress=progress,
        workers=workers,
    )
    phase = res.phase_rad
    if rows or cols:
        phase = add_phase_ramp(phase, rows, cols)
    if res.target is not design_target:  # MRAF added a window: keep it with the placed target
        win = replace(target, signal=res.target.signal, free=res.target.free)
        placed = win.shifted(rows, cols) if (rows or cols) else win
    levels = display_levels(phase, system)
    lut = grey_map_for(system.slm)
    return Hologram(
        phase_rad=phase.astype(np.float32, copy=False),
        levels=levels,
        grey=lut.to_grey(levels),
        target=placed,
        settings=st,
        offset_samples=(rows, cols),
        lit_fraction_history=res.lit_fraction_history,
        group_weights=res.group_weights,
    )


def _envelope_compensated(target: Target, system, rows: int, cols: int) -> Target:
    """Target divided by the pixel envelope at the place the pattern will land.

    References
    ----------
    .. [1] Goodman (2005), §4.2.2: the pixel aperture multiplies the far field
       by ``sinc²``; pre-dividing the target is common practice.
    """
    shape = target.shape
    env = pixel_aperture_envelope(shape, shape, float(np.sqrt(system.slm.fill_factor)))
    if rows or cols:
        env = np.roll(env, (-rows, -cols), axis=(0, 1))
    comp = target.intensity / np.maximum(env, np.float32(1e-3))
    comp /= np.float32(comp.max())
    return replace(target, intensity=comp)

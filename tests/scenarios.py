"""Sequence texts of our own for the tests and the benchmarks (rat eye, 55 µm array).

One builder, :func:`header`, writes the optics, eye, implant and hologram
sections; the scenarios add their stimuli and steps. The benchmarks import
this module too.
"""

from __future__ import annotations

__all__ = [
    "header",
    "small_sequence",
    "gui_sequence",
    "reversal_step",
    "drifting_steps",
    "drifting_grating",
]

HEADER = """
format = "stimplan-sequence/1"
title = "{title}"
seed = {seed}

[optics.slm]
pixels_x = {n}
pixels_y = {n}
pitch_um = 8.0
fill_factor = 0.93
phase_levels = 256

[optics.laser]
wavelength_nm = 880
power_mw = {power_mw}
profile = "gaussian"
waist_mm = {waist}

[optics.relay]
magnification = {magnification}

[eye]
preset = "rat"

[implant]
preset = "rat_55um"

[hologram]
method = "mraf"
iterations = {iterations}
"""


def header(
    n: int,
    *,
    title: str,
    seed: int = 1,
    waist_mm: float | None = None,
    iterations: int = 40,
    aware: bool | None = False,
    initial: str | None = "lens",
    power_mw: float = 2.0,
    magnification: float = 0.2,
) -> str:
    """The sections up to ``[hologram]`` for an ``n x n`` SLM of 8 µm pixels.

    ``waist_mm`` defaults to the SLM width / 3.5 (the beam fills the SLM);
    ``aware`` and ``initial`` are left out of the file when None.
    """
    waist = n * 8e-3 / 3.5 if waist_mm is None else waist_mm
    text = HEADER.format(
        n=n,
        title=title,
        seed=seed,
        waist=waist,
        iterations=iterations,
        power_mw=power_mw,
        magnification=magnification,
    )
    if initial is not None:
        text += f'initial = "{initial}"\n'
    if aware is not None:
        text += f"implant_aware = {str(aware).lower()}\n"
    return text


def small_sequence(irradiance: float = 1.0, spot_power: float = 1.5) -> str:
    """A 256² SLM, a grating at a target irradiance and a spot at a laser power."""
    return (
        header(256, title="small test session", seed=3, waist_mm=0.6, iterations=30, aware=None)
        + f"""
[stimuli.bars]
kind = "grating"
bar_width_px = 2

[stimuli.spot]
kind = "spot"
diameter_um = 300
center_x_um = 150

[[steps]]
stimulus = "bars"
duration_ms = 500
pulse_ms = 10
rate_hz = 20
irradiance_mw_per_mm2 = {irradiance}
blank_after_ms = 200

[[steps]]
stimulus = "spot"
duration_ms = 300
pulse_ms = 5
rate_hz = 10
power_mw = {spot_power}
"""
    )


def gui_sequence(power: float, limits: str = "") -> str:
    """The rat optics on a 128-pixel SLM (same field, coarser sampling), two stimuli and
    dark pauses; ``limits`` is an optional ``[limits]`` section."""
    return (
        header(
            128, title="GUI check, small rat array", seed=3, iterations=12, aware=True, initial=None
        )
        + limits
        + f"""
[stimuli.bars]
kind = "grating"
bar_width_px = 2

[stimuli.dot]
kind = "spot"
diameter_um = 400

[[steps]]
stimulus = "bars"
duration_ms = 200
pulse_ms = 10
rate_hz = 20
power_mw = {power}
blank_after_ms = 100

[[steps]]
stimulus = "dot"
duration_ms = 100
pulse_ms = 10
rate_hz = 20
power_mw = {power}
repeat = 2
blank_after_ms = 50
"""
    )


def reversal_step(
    *, alternate_ms: float = 250, duration_ms: float = 1000, light: str = "power_mw = 1.0"
) -> str:
    """A ``[[steps]]`` table: the checkerboard ``checks`` and its reversed partner in turn,
    20 Hz pulses of 10 ms; ``light`` is the step's power or irradiance line(s)."""
    return f"""
[[steps]]
alternate = ["checks", "checks:reversed"]
alternate_ms = {alternate_ms}
duration_ms = {duration_ms}
pulse_ms = 10
rate_hz = 20
{light}
"""


def drifting_steps(
    frames: int, *, period_um: float = 220.0, duration_ms: float = 100, pulse_ms: float = 10
) -> str:
    """The stimuli and steps of a square grating drifting through one period in ``frames``
    steps (20 Hz pulses at 1 mW), without the header."""
    parts = []
    for k in range(frames):
        parts.append(
            f"""
[stimuli.drift_{k:03d}]
kind = "grating"
period_um = {period_um}
phase_deg = {360.0 * k / frames:.6f}
"""
        )
    for k in range(frames):
        parts.append(
            f"""
[[steps]]
stimulus = "drift_{k:03d}"
duration_ms = {duration_ms}
pulse_ms = {pulse_ms}
rate_hz = 20
power_mw = 1.0
"""
        )
    return "".join(parts)


def drifting_grating(n: int, frames: int, *, period_um: float = 220.0) -> str:
    """A square grating drifting through one period in ``frames`` steps (image domain)."""
    return header(n, title=f"drifting grating, {frames} frames") + drifting_steps(
        frames, period_um=period_um
    )

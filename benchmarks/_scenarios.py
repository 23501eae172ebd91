"""Sequence texts for the benchmarks (demo numbers of our own)."""

from __future__ import annotations

HEADER = """
format = "stimplan-sequence/1"
title = "{title}"
seed = 1

[optics.slm]
pixels_x = {n}
pixels_y = {n}
pitch_um = 8.0
fill_factor = 0.93
phase_levels = 256

[optics.laser]
wavelength_nm = 880
power_mw = 2.0
profile = "gaussian"
waist_mm = {waist}

[optics.relay]
magnification = 0.2

[eye]
preset = "rat"

[implant]
preset = "rat_55um"

[hologram]
method = "mraf"
iterations = {iterations}
initial = "lens"
implant_aware = {aware}
"""


def header(n: int, *, title: str, iterations: int = 40, aware: bool = False) -> str:
    return HEADER.format(
        n=n, title=title, waist=n * 8e-3 / 3.5, iterations=iterations, aware=str(aware).lower()
    )


def drifting_grating(n: int, frames: int, *, period_um: float = 220.0) -> str:
    """A square grating drifting through one period in ``frames`` steps (image domain)."""
    parts = [header(n, title=f"drifting grating, {frames} frames")]
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
duration_ms = 100
pulse_ms = 10
rate_hz = 20
power_mw = 1.0
"""
        )
    return "".join(parts)

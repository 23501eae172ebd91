"""Small sequence files for the tests (256² SLM, rat eye, 55 µm array; demo numbers)."""

from __future__ import annotations

SMALL = """
format = "stimplan-sequence/1"
title = "small test session"
seed = 3

[optics.slm]
pixels_x = 256
pixels_y = 256
pitch_um = 8.0
fill_factor = 0.93
phase_levels = 256

[optics.laser]
wavelength_nm = 880
power_mw = 2.0
profile = "gaussian"
waist_mm = 0.6

[optics.relay]
magnification = 0.2

[eye]
preset = "rat"

[implant]
preset = "rat_55um"

[hologram]
method = "mraf"
iterations = 30
initial = "lens"

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


def small_sequence(irradiance: float = 1.0, spot_power: float = 1.5) -> str:
    return SMALL.format(irradiance=irradiance, spot_power=spot_power)

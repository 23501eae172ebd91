"""Speed of implant rasterising and stimulus rendering on a 1024² retinal grid.

Each figure is a ratio to one complex64 ``scipy.fft`` of the same grid on all
cores, timed in the same run. Prints one line::

    rasterize_over_fft=… render_grating_over_fft=… render_landolt_over_fft=…
    render_letter_over_fft=…   (all on the same line)
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import scipy.fft as sfft

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _timing import best_time

from stimplan.grid import RetinalGrid
from stimplan.implant import implant_preset
from stimplan.stimuli import Grating, LandoltRing, SloanLetter


def main() -> None:
    grid = RetinalGrid((1024, 1024), 1.5, 1.5)
    x = (np.random.default_rng(0).standard_normal(grid.shape) + 0j).astype(np.complex64)
    fft = best_time(lambda: sfft.fft2(x, workers=-1), 7)
    # a new implant each time: rasterising is cached per (implant, grid, region)
    angles = iter(np.linspace(1.0, 50.0, 10))
    raster = best_time(
        lambda: implant_preset("rat_55um", rotation_deg=float(next(angles))).rasterize(grid), 3
    )
    stimuli = {
        "grating": Grating(period_um=60.0, rotation_deg=25.0),
        "landolt": LandoltRing(height_um=600.0, orientation="up_left"),
        "letter": SloanLetter(letter="S", height_um=900.0, rotation_deg=5.0),
    }
    parts = [f"rasterize_over_fft={raster / fft:.1f}"]
    for name, stim in stimuli.items():
        parts.append(
            f"render_{name}_over_fft={best_time(lambda s=stim: s.render(grid), 3) / fft:.1f}"
        )
    print(" ".join(parts), flush=True)


if __name__ == "__main__":
    main()

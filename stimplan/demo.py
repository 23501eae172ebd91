"""The built-in demo: one hologram for a rat-eye grating patch, with its figures.

The scenario and its numbers are a demo of our own, not measured data.
"""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path

import numpy as np

from ._atomic import atomic_folder
from .baseline import MASK_PRESETS, project_mask
from .holography import IftaSettings, design_hologram
from .metrics import pattern_metrics
from .system import SLM, Eye, Illumination, OpticalSystem, Relay
from .target import Target


def demo_system(quick: bool = False) -> OpticalSystem:
    """Demo optics: 8 µm SLM, 880 nm Gaussian beam, relay ×0.5, rat eye (demo values)."""
    n = 256 if quick else 512
    return OpticalSystem(
        SLM(n, n, pitch_um=8.0, fill_factor=0.93, phase_levels=256, zero_order_fraction=0.02),
        Illumination(880.0, power_mw=5.0, profile="gaussian", waist_mm=n * 8e-3 / 4.0),
        Relay(magnification=0.5),
        Eye(um_per_deg=60.0, pupil_diameter_mm=4.0, transmission=0.8, name="rat"),
    )


def demo_target(system: OpticalSystem) -> Target:
    """Three bars of 110 µm period inside a 400 µm window, off the axis by 250 µm."""
    grid = system.design_grid()
    x, y = grid.coords_um()
    period_um, cx = 110.0, 250.0
    bars = (np.mod(x - cx, period_um) < period_um / 2) & (np.abs(x - cx) < 200) & (np.abs(y) < 200)
    return Target.from_intensity(bars.astype(np.float32), grid, name="grating-patch")


def run_demo(output: str | Path, *, force: bool = False, quick: bool = False) -> int:
    """Compute the demo hologram, print its figures and write them to ``output``."""
    system = demo_system(quick)
    target = demo_target(system)
    t0 = time.perf_counter()
    holo = design_hologram(
        target, system, IftaSettings(method="mraf", iterations=60, seed=1, initial="lens")
    )
    pred = holo.predict(system)
    m = pattern_metrics(pred, holo.target)
    grid = pred.grid
    mask = MASK_PRESETS["lcd"]
    mp = project_mask(
        holo.target.intensity_on(grid),
        grid,
        mask,
        system.illumination.power_mw,
        eye_transmission=system.eye.transmission,
    )
    lit = holo.target.region_on(grid, "lit")
    mask_lit = float(np.sum(mp.irradiance_mw_per_mm2 * lit) / lit.sum())
    dt = time.perf_counter() - t0
    acc = pred.account
    lines = [
        f"stimplan demo: {target.name} on a {system.slm.pixels_x}x{system.slm.pixels_y} SLM "
        f"({dt:.1f} s)",
        f"  retinal sample pitch       {system.sample_pitch_x_um:8.2f} um",
        f"  steerable field            {system.field_width_um:8.0f} um "
        f"({system.field_width_deg:.1f} deg)",
        f"  laser power on SLM         {acc.input_mw:8.2f} mW",
        f"  efficiency (lit region)    {m.efficiency:8.3f}",
        f"  uniformity                 {m.uniformity:8.3f}",
        f"  RMS error                  {m.rms_error:8.3f}",
        f"  speckle contrast           {m.speckle_contrast:8.3f}",
        f"  lit irradiance, hologram   {m.mean_lit_irradiance_mw_per_mm2:8.3f} mW/mm^2",
        f"  lit irradiance, LCD mask   {mask_lit:8.3f} mW/mm^2",
        f"  hologram gain over mask    {m.mean_lit_irradiance_mw_per_mm2 / mask_lit:8.1f} x",
        "  power account (mW): "
        + ", ".join(
            f"{k.replace('_mw', '')} {v:.3f}"
            for k, v in acc.as_dict().items()
            if v is not None and k != "input_mw"
        ),
    ]
    print("\n".join(lines))
    with atomic_folder(output, force=force) as tmp:
        from PIL import Image

        Image.fromarray(holo.grey).save(tmp / "hologram.png")
        summary = {
            "system": system.summary(),
            "metrics": m.as_dict(),
            "mask_lit_irradiance_mw_per_mm2": mask_lit,
            "power_account_mw": acc.as_dict(),
            "seed": holo.settings.seed,
        }
        (tmp / "summary.json").write_text(json.dumps(summary, indent=2))
    print(f"  written to {Path(output)}", file=sys.stderr)
    return 0

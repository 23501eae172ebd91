"""The exact exposure assessment of one distinct map against the design of its hologram.

The demo's rat optics at their own SLM size (1024² by default), one grating, a
20 Hz train of 10 ms pulses over 1 s. Both times are measured in this run, on
one plan: ``ifta_s`` is the design of the hologram with the demo's settings,
``exposure_s`` the bounded worst-case assessment of the sequence (every centre,
also between samples, and every acceptance angle). Prints one line:

``exposure_over_ifta=<exposure_s / ifta_s> exposure_s=... ifta_s=... disc_maps=...``

``disc_maps`` counts the FFT disc-power maps the assessment computed (each one
disc convolution over the box of centres that block bounds leave open, on the
part of the map with its neighbouring orders that those discs reach), ``exact_sums``
the exact disc sums at candidate centres, ``angles`` the acceptance angles
evaluated. Block-sum bounds (small FFTs on the pooled map) are not counted.
"""

from __future__ import annotations

import argparse
import dataclasses
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from stimplan.plan import plan_sequence
from stimplan.scenarios import load_scenario, with_slm_pixels
from stimplan.sequence import StepSpec
from stimplan.stimuli import Grating


def one_map_spec(slm_pixels: int | None):
    """The rat demo's optics with one grating shown as a 20 Hz x 10 ms train for 1 s."""
    base = load_scenario("rat_grating_acuity.toml")
    system = with_slm_pixels(base.system, slm_pixels)
    step = StepSpec(("bars",), duration_ms=1000.0, pulse_ms=10.0, rate_hz=20.0, power_mw=1.0)
    return dataclasses.replace(
        base,
        system=system,
        stimuli={"bars": Grating(period_um=220.0)},
        steps=(step,),
        shuffle=False,
        repeats=1,
        protocol=None,
        raw={},
    )


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--slm-pixels", type=int, default=1024)
    args = ap.parse_args(argv)
    plan_sequence(one_map_spec(128), progress=False).close()  # warm the kernels
    t0 = time.perf_counter()
    with plan_sequence(one_map_spec(args.slm_pixels), progress=False) as plan:
        wall = time.perf_counter() - t0
        ifta_s = plan.holograms[0].timings_s["holograms"]
        exposure_s = plan.timings_s["exposure"]
        work = plan.exposure.work
    print(
        f"exposure_over_ifta={exposure_s / ifta_s:.2f} exposure_s={exposure_s:.2f} "
        f"ifta_s={ifta_s:.2f} disc_maps={work['disc_maps']} exact_sums={work['exact_sums']} "
        f"angles={work['angles']} plan_s={wall:.1f} slm_pixels={args.slm_pixels}"
    )


if __name__ == "__main__":
    main()

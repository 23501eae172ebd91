"""The built-in demo: the rat grating-acuity scenario, planned, exported and reported.

The scenario file ships with the package (``stimplan/data`` is the project's
``stimuli/`` folder). Its numbers are a demo of our own, not a measured
protocol.
"""

from __future__ import annotations

import sys
from dataclasses import replace
from importlib import resources
from pathlib import Path

from ._atomic import atomic_folder

__all__ = ["DEMO_SCENARIO", "demo_path", "demo_spec", "run_demo", "demo_system", "demo_target"]

DEMO_SCENARIO = "rat_grating_acuity.toml"


def demo_path(name: str = DEMO_SCENARIO) -> Path:
    """Path of a shipped scenario file."""
    return Path(str(resources.files("stimplan").joinpath("data", name)))


def demo_spec(quick: bool = False, name: str = DEMO_SCENARIO):
    """The demo sequence; ``quick`` halves the SLM (same field, coarser sampling)."""
    from .sequence import load_sequence

    spec = load_sequence(demo_path(name))
    if quick:
        sysm = spec.system
        slm = replace(sysm.slm, pixels_x=sysm.slm.pixels_x // 2, pixels_y=sysm.slm.pixels_y // 2)
        ill = replace(sysm.illumination, waist_mm=sysm.illumination.waist_mm / 2)
        relay = sysm.relay
        if relay.fresnel_focal_mm is not None:
            relay = replace(relay, fresnel_focal_mm=relay.fresnel_focal_mm / 2)
        spec = replace(spec, system=replace(sysm, slm=slm, illumination=ill, relay=relay))
    return spec


def demo_system(quick: bool = True):
    """The demo's optical system."""
    return demo_spec(quick).system


def demo_target(system, name: str = "bars_2px"):
    """One demo stimulus as an image-domain target on ``system``'s design grid."""
    from .optics.target import Target

    spec = demo_spec(system.slm.pixels_x < 1024)
    grid = system.design_grid()
    return Target.from_intensity(spec.stimuli[name].render(grid), grid, name=name)


def run_demo(output: str | Path, *, force: bool = False, quick: bool = False) -> int:
    """Plan the demo scenario, write ``export/`` and ``report.html`` into ``output``.

    Prints the summary table (with the cautions). The output folder is
    written atomically and never replaced without ``force``.
    """
    from .plan import plan_sequence
    from .present.export import export_plan
    from .present.report import write_report
    from .present.summary import print_table

    spec = demo_spec(quick)
    plan = plan_sequence(spec, progress=True)
    with atomic_folder(output, force=force) as tmp:
        export_plan(plan, tmp / "export")
        write_report(plan, tmp / "report.html")
    print_table(plan)
    print(f"demo written to {Path(output)} (export/ and report.html)", file=sys.stderr)
    return 0

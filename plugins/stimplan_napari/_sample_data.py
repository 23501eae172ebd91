"""Sample data: the built-in demo computed and shown with physical scale (µm).

``demo_retina`` is one stimulus of the rat demo; the scenario samples plan a
whole demo sequence (on an SLM of half the pixels, the same field sampled
more coarsely, so that they open in seconds rather than half a minute).
"""

from __future__ import annotations

from stimplan.holography import IftaSettings, design_hologram
from stimplan.plan import plan_sequence
from stimplan.scenarios import load_scenario, scenario_target

from ._layers import grid_placement, plan_layers
from ._readout import announce

__all__ = ["demo_retina", "demo_rat_grating_acuity", "demo_human_letter_acuity"]


def demo_retina() -> list[tuple]:
    """Target, SLM phase and predicted retinal irradiance of the quick demo, as layer tuples."""

    system = load_scenario(quick=True).system
    target = scenario_target(system)
    holo = design_hologram(target, system, IftaSettings(method="mraf", iterations=40, seed=1))
    pred = holo.predict(system)
    top = float(pred.irradiance_mw_per_mm2.max()) or 1.0
    return [
        (
            target.intensity,
            {"name": "target (relative)", **grid_placement(target.grid)},
            "image",
        ),
        (
            pred.irradiance_mw_per_mm2,
            {
                "name": "retina irradiance (mW/mm^2)",
                "colormap": "inferno",
                "contrast_limits": (0.0, top),
                **grid_placement(pred.grid),
            },
            "image",
        ),
    ]


def _scenario(name: str) -> list[tuple]:

    plan = plan_sequence(load_scenario(name, quick=True), progress=True)
    announce(plan)
    return plan_layers(plan)


def demo_rat_grating_acuity() -> list[tuple]:
    """The rat grating-acuity demo sequence, planned (per-frame retina with a time axis)."""
    return _scenario("rat_grating_acuity.toml")


def demo_human_letter_acuity() -> list[tuple]:
    """The human letter-acuity demo sequence, planned (per-frame retina with a time axis)."""
    return _scenario("human_letter_acuity.toml")

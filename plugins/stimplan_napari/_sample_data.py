"""Sample data: the built-in demo computed and shown with physical scale (µm).

``demo_retina`` is one stimulus of the rat demo; the scenario samples plan a
whole demo sequence (on an SLM of half the pixels, the same field sampled
more coarsely). In a viewer the plan runs in a worker thread, with napari's
progress bar: the sample opens at once with the implant's outline, and the
planned layers follow when the plan is done, so the viewer never freezes.
"""

from __future__ import annotations

import napari
from napari.qt.threading import create_worker

from stimplan.holography import IftaSettings, design_hologram
from stimplan.plan import plan_sequence
from stimplan.scenarios import load_scenario, scenario_target

from ._layers import LAYER_NAMES, grid_placement, implant_shapes, plan_layers
from ._readout import announce
from ._widgets import frame_retina, put_layers

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
            {"name": LAYER_NAMES["target"], **grid_placement(target.grid)},
            "image",
        ),
        (
            pred.irradiance_mw_per_mm2,
            {
                "name": LAYER_NAMES["irradiance"],
                "colormap": "inferno",
                "contrast_limits": (0.0, top),
                **grid_placement(pred.grid),
            },
            "image",
        ),
    ]


#: Planning workers still running (kept so that they are not collected mid-plan).
_RUNNING: set = set()


def _scenario(name: str) -> list[tuple]:
    spec = load_scenario(name, quick=True)
    viewer = napari.current_viewer()
    if viewer is None:  # no viewer to add layers to later: plan here
        plan = plan_sequence(spec, progress=True)
        announce(plan)
        return plan_layers(plan)
    worker = create_worker(
        plan_sequence, spec, progress=False, _progress={"desc": f"stimplan: planning {name}"}
    )

    def done(plan) -> None:
        frame_retina(viewer, put_layers(viewer, plan_layers(plan)))
        announce(plan)

    worker.returned.connect(done)
    worker.finished.connect(lambda: _RUNNING.discard(worker))
    _RUNNING.add(worker)
    worker.start()
    # at once: the implant's outline (the planned layers follow)
    return [implant_shapes(spec.implant)] if spec.implant is not None else []


def demo_rat_grating_acuity() -> list[tuple]:
    """The rat grating-acuity demo sequence, planned (per-frame retina with a time axis)."""
    return _scenario("rat_grating_acuity.toml")


def demo_human_letter_acuity() -> list[tuple]:
    """The human letter-acuity demo sequence, planned (per-frame retina with a time axis)."""
    return _scenario("human_letter_acuity.toml")

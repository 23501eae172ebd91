"""GUI: the plugin's sample data opens in a real napari viewer (Xvfb + Mesa)."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan_napari._layers import LAYER_NAMES, PLAN_KEY


def test_sample_data_opens_with_physical_scale(make_napari_viewer):
    viewer = make_napari_viewer(show=True)
    viewer.open_sample("stimplan", "demo_retina")
    names = [layer.name for layer in viewer.layers]
    assert LAYER_NAMES["irradiance"] in names
    layer = viewer.layers[LAYER_NAMES["irradiance"]]
    assert layer.scale[0] == pytest.approx(layer.scale[1])
    assert 0.1 < layer.scale[0] < 10  # micrometres per sample, not pixels
    shot = viewer.screenshot(flash=False)
    assert shot.ndim == 3 and np.ptp(shot[..., :3]) > 0  # not blank


def test_a_scenario_sample_plans_in_a_worker_and_never_freezes_the_viewer(
    make_napari_viewer, qtbot, monkeypatch
):
    # common practice (napari: long work off the GUI thread): the sample returns at
    # once with the implant's outline; the planned sequence follows from a worker.
    # The scenario is swapped for the small test session (the mechanism is the same).
    from stimplan.sequence import parse_sequence
    from stimplan_napari import _sample_data

    from .scenarios import gui_sequence

    monkeypatch.setattr(
        _sample_data, "load_scenario", lambda name, quick: parse_sequence(gui_sequence(1.0))
    )
    viewer = make_napari_viewer(show=True)
    viewer.open_sample("stimplan", "rat_grating_acuity")
    assert [layer.name for layer in viewer.layers] == [LAYER_NAMES["outline"]]
    qtbot.waitUntil(lambda: LAYER_NAMES["sequence"] in viewer.layers, timeout=300000)
    seq = viewer.layers[LAYER_NAMES["sequence"]]
    plan = seq.metadata[PLAN_KEY]
    assert seq.data.shape[0] == len(plan.frames)
    assert viewer.canvas.overlays.scale_bar.visible

"""GUI: the plugin's sample data opens in a real napari viewer (Xvfb + Mesa)."""

from __future__ import annotations

import numpy as np
import pytest


def test_sample_data_opens_with_physical_scale(make_napari_viewer):
    viewer = make_napari_viewer(show=True)
    viewer.open_sample("stimplan", "demo_retina")
    names = [layer.name for layer in viewer.layers]
    assert "retina irradiance (mW/mm^2)" in names
    layer = viewer.layers["retina irradiance (mW/mm^2)"]
    assert layer.scale[0] == pytest.approx(layer.scale[1])
    assert 0.1 < layer.scale[0] < 10  # micrometres per sample, not pixels
    shot = viewer.screenshot(flash=False)
    assert shot.ndim == 3 and np.ptp(shot[..., :3]) > 0  # not blank

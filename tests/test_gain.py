"""The hologram's ON-pixel gain over a mask, as efficiency x area x coverage."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan.errors import ConfigError
from stimplan.gain import gain_factors
from stimplan.plan import plan_sequence
from stimplan.present.summary import plan_summary
from stimplan.sequence import parse_sequence

from .scenarios import gui_sequence


def _mask_power_uw(level, *, p_mw, eta, tau, field_mm2, pd_mm2, cr=1000.0):
    # Source: den Boer, Active Matrix Liquid Crystal Displays (2005), §6.1: the panel
    # passes eta of the light spread over its image; E = P eta tau / A (t + (1 - t)/CR)
    e = p_mw * eta * tau / field_mm2 * (level + (1 - level) / cr)
    return e * pd_mm2 * 1e3


def test_fully_lit_on_pixels_have_coverage_one_and_the_area_ratio_in_closed_form():
    n, pd = 20, 0.001  # 20 ON photodiodes of 1000 µm² (demo values)
    field = 0.5  # mm²
    mask = np.full(n, _mask_power_uw(1.0, p_mw=2.0, eta=0.07, tau=0.8, field_mm2=field, pd_mm2=pd))
    holo = np.full(n, 30.0)  # µW each: 0.6 mW of the 2 mW on the ON photodiodes
    g = gain_factors(
        hologram_on_power_uw=holo,
        mask_on_power_uw=mask,
        on_active_area_mm2=np.full(n, pd),
        laser_power_mw=2.0,
        mask_efficiency=0.07,
        eye_transmission=0.8,
        field_area_mm2=field,
    )
    assert g.coverage == pytest.approx(1.0, rel=1e-12)
    assert g.area == pytest.approx(field / (n * pd), rel=1e-12)  # 25
    assert g.efficiency == pytest.approx(0.3 / (0.07 * 0.8), rel=1e-12)
    assert g.product == pytest.approx(holo.mean() / mask.mean(), rel=1e-12)


def test_half_lit_photodiodes_double_the_coverage_factor():
    # a photodiode half inside a bright edge sees the mean level (1 + 1/CR) / 2
    pd, field = 0.002, 1.0
    full = _mask_power_uw(1.0, p_mw=1.0, eta=0.5, tau=1.0, field_mm2=field, pd_mm2=pd)
    dark = _mask_power_uw(0.0, p_mw=1.0, eta=0.5, tau=1.0, field_mm2=field, pd_mm2=pd)
    g = gain_factors(
        hologram_on_power_uw=np.array([10.0]),
        mask_on_power_uw=np.array([(full + dark) / 2]),
        on_active_area_mm2=np.array([pd]),
        laser_power_mw=1.0,
        mask_efficiency=0.5,
        eye_transmission=1.0,
        field_area_mm2=field,
    )
    assert g.coverage == pytest.approx(2.0 / (1.0 + 1e-3), rel=1e-12)


def test_no_on_pixel_is_a_clear_error():
    with pytest.raises(ConfigError, match="on_pixels"):
        gain_factors(
            hologram_on_power_uw=np.array([]),
            mask_on_power_uw=np.array([]),
            on_active_area_mm2=np.array([]),
            laser_power_mw=1.0,
            mask_efficiency=0.07,
            eye_transmission=0.8,
            field_area_mm2=1.0,
        )


@pytest.fixture(scope="module")
def summary():
    plan = plan_sequence(parse_sequence(gui_sequence(1.0)), progress=False)
    try:
        yield plan_summary(plan)
    finally:
        plan.close()


def test_the_factors_of_each_stimulus_multiply_to_its_on_pixel_power_ratio(summary):
    # common practice: the three factors are defined to multiply to the hologram-over-mask
    # ON-pixel power ratio; checked within 1 % against the two per-pixel readouts
    for row in summary["stimuli"]:
        f = row["gain_factors"]
        power = row["on_pixel_power_uw"]
        ratio = power["hologram"] / power["mask"]
        assert f["efficiency"] * f["area"] * f["coverage"] == pytest.approx(ratio, rel=0.01)
        assert row["gain_over_mask"] == pytest.approx(ratio, rel=0.01)
        # the mask never shows more than full level: t + (1 - t)/CR <= 1 (den Boer, §6.1)
        assert f["coverage"] >= 1.0 - 1e-6
        assert f["area"] > 1.0  # the mask's field is larger than the ON photodiodes

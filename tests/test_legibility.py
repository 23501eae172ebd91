"""Legibility: a stimulus's finest detail against the array's sampling limit."""

from __future__ import annotations

import pytest

from stimplan.legibility import critical_detail_um, legibility
from stimplan.optics.eye import eye_preset
from stimplan.stimuli import Checkerboard, Flash, Grating, LandoltRing, TumblingE, compose


def test_optotype_detail_is_a_fifth_of_its_height():
    # Source: ISO 8596: the Landolt ring's stroke and gap are 1/5 of its outer diameter.
    assert critical_detail_um(LandoltRing(height_um=400.0)) == pytest.approx(80.0)
    # Source: Ho et al., J. Neural Eng. 16, 066027 (2019): a grating's critical detail
    # is its bar width (half the period).
    assert critical_detail_um(Grating(period_um=110.0)) == pytest.approx(55.0)
    assert critical_detail_um(Flash()) is None
    both = compose(Grating(period_um=400.0), Checkerboard(check_um=90.0))
    assert critical_detail_um(both) == pytest.approx(90.0)


def test_a_landolt_c_of_400_um_is_not_resolved_by_100_um_pixels():
    # Its 80 µm gap is under one 100 µm pitch: the sampling (Nyquist) limit of the
    # array is a bar width of one pitch.
    # Source: Lorach et al., Nat. Med. 21, 476 (2015); ISO 8596.
    leg = legibility(LandoltRing(height_um=400.0), 100.0, name="ring")
    assert leg.resolvable is False
    assert leg.warnings and "ring" in leg.warnings[0] and "80 µm" in leg.warnings[0]


def test_a_20_400_tumbling_e_on_the_human_eye_is_below_100_um_pixels():
    # 20/400: MAR 20 arcmin; the human eye's 288 µm/deg (Drasdo & Fowler 1974) gives
    # 20/60 * 288 = 96 µm per stroke, under a 100 µm pitch.
    # Source: Bailey & Lovie 1976 (Snellen 20/x: MAR = x/20 arcmin).
    human = eye_preset("human")
    e = TumblingE.from_snellen("20/400", human)
    assert critical_detail_um(e) == pytest.approx(20 / 60 * human.um_per_deg, rel=1e-9)
    assert legibility(e, 100.0).resolvable is False


@pytest.mark.parametrize(
    ("period_um", "resolvable", "warned"),
    [(100.0, False, True), (110.0, True, True), (165.0, True, False)],
)
def test_gratings_at_the_sampling_limit(period_um, resolvable, warned):
    # Source: Ho et al. (2019): bar width = one pitch is the limit; 1.5 pitches is the
    # near-limit margin (common practice).
    leg = legibility(Grating(period_um=period_um), 55.0)
    assert leg.resolvable is resolvable
    assert bool(leg.warnings) is warned


def test_a_grating_whose_bars_average_out_in_every_cell_is_not_rendered():
    # 10 µm bars (period 20 µm) on 100 µm square cells: five periods per cell, so every
    # cell's mean is 1/2 for any phase (closed form) and every pixel is ON (threshold
    # 0.4) with or without the half-period shift: the bars have no ON/OFF contrast.
    from stimplan.implant import Implant
    from stimplan.legibility import feature_rendered

    square = Implant(
        pitch_um=100.0, layout="square", outline="square", width_um=600.0, active_fraction=0.5
    )
    assert feature_rendered(Grating(period_um=20.0), square, threshold=0.4) is False
    leg = legibility(Grating(period_um=20.0), 100.0, implant=square, threshold=0.4)
    assert leg.rendered is False and any("no contrast" in w for w in leg.warnings)
    # 200 µm bars cover whole cells: the shifted grating turns other pixels ON
    assert feature_rendered(Grating(period_um=400.0), square, threshold=0.4) is True


def test_a_large_landolt_gap_is_rendered_on_the_clinical_array():
    # logMAR 1.9: a 381 µm gap (Bailey & Lovie 1976; ISO 8596; 288 µm/deg, Drasdo &
    # Fowler 1974) spans more than three 100 µm pixels: the ring with the gap turns
    # pixels OFF that the closed ring turns ON.
    from stimplan.implant import implant_preset
    from stimplan.legibility import feature_rendered

    ring = LandoltRing(height_um=5 * 10**1.9 / 60 * 288.0)
    assert feature_rendered(ring, implant_preset("human_100um")) is True
    assert feature_rendered(Flash(), implant_preset("human_100um")) is None

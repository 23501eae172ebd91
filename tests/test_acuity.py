"""Acuity conversions and eye presets, checked against published definitions."""

from __future__ import annotations

import math

import pytest

from stimplan import acuity as ac
from stimplan.errors import ConfigError
from stimplan.optics.eye import (
    EYE_PRESETS,
    MOUSE_UM_PER_DEG,
    RAT_TO_MOUSE_SCALE,
    eye_names,
    eye_preset,
)
from stimplan.optics.system import Eye

# -- logMAR, MAR, Snellen, decimal -------------------------------------------------


def test_snellen_20_20_is_logmar_0():
    # Source: Bailey & Lovie, Am. J. Optom. Physiol. Opt. 53, 740 (1976): logMAR = log10(MAR),
    # Snellen 20/x means MAR = x/20 arcmin.
    assert ac.logmar_from_snellen("20/20") == pytest.approx(0.0, abs=1e-12)
    assert ac.mar_from_snellen("20/20") == pytest.approx(1.0)


def test_snellen_20_200_is_logmar_1():
    # Source: Bailey & Lovie 1976.
    assert ac.logmar_from_snellen("20/200") == pytest.approx(1.0)
    assert ac.logmar_from_snellen("6/60") == pytest.approx(1.0)
    assert ac.logmar_from_snellen((20, 200)) == pytest.approx(1.0)


def test_one_line_is_0_1_log_units():
    # Source: Bailey & Lovie 1976: successive lines differ by 0.1 log units, a factor 10**0.1
    # (about 1.26) in letter size.
    m0 = ac.mar_from_logmar(0.3)
    m1 = ac.mar_from_logmar(0.4)
    assert m1 / m0 == pytest.approx(10**0.1)
    assert ac.logmar_from_mar(m1) - ac.logmar_from_mar(m0) == pytest.approx(0.1)
    # 20/25 is one line below 20/20 within the rounding of chart labels (log10(1.25) = 0.097)
    assert ac.logmar_from_snellen("20/25") == pytest.approx(0.1, abs=0.005)


def test_snellen_6_and_20_agree():
    # Source: Bailey & Lovie 1976 (6 m and 20 ft notations of the same MAR).
    assert ac.mar_from_snellen("6/12") == pytest.approx(ac.mar_from_snellen("20/40"))
    assert ac.snellen_from_logmar(1.0, numerator=6) == pytest.approx(60.0)
    assert ac.snellen_text(2.0) == "20/40"


def test_decimal_acuity_is_inverse_mar():
    # Source: ISO 8596: at decimal acuity 1.0 the gap of the Landolt ring subtends 1 arcmin.
    assert ac.mar_from_decimal(1.0) == pytest.approx(1.0)
    assert ac.decimal_from_logmar(1.0) == pytest.approx(0.1)
    assert ac.logmar_from_decimal(0.5) == pytest.approx(math.log10(2.0))
    assert ac.decimal_from_mar(ac.mar_from_snellen("20/40")) == pytest.approx(0.5)


@pytest.mark.parametrize("bad", ["20-20", "20/", "abc", (20,), (0, 20), "20/0"])
def test_bad_snellen_raises(bad):
    # common practice
    with pytest.raises(ConfigError) as err:
        ac.mar_from_snellen(bad)
    assert "snellen" in str(err.value)


def test_bad_mar_names_field_and_range():
    # common practice
    with pytest.raises(ConfigError) as err:
        ac.logmar_from_mar(0.0)
    assert err.value.field == "mar_arcmin"
    assert "> 0" in str(err.value)


# -- eye presets and retinal scale -------------------------------------------------


def test_human_scale_288_um_per_deg():
    # Source: Drasdo & Fowler, Br. J. Ophthalmol. 58, 709 (1974): 288 µm per degree.
    eye = eye_preset("human")
    assert eye.um_per_deg == 288.0
    assert eye.deg_to_um(1.0) == pytest.approx(288.0)
    # 1 arcmin = 4.8 µm on the human retina
    assert ac.arcmin_to_um(1.0, eye) == pytest.approx(288.0 / 60.0)


def test_rat_is_mouse_times_published_scale():
    # Source: Remtulla & Hallett, Vision Res. 25, 21 (1985): rat/mouse linear scale 1.9-2.0;
    # mouse about 31 µm/deg (from memory).
    rat = eye_preset("rat")
    lo, hi = 1.9 * MOUSE_UM_PER_DEG, 2.0 * MOUSE_UM_PER_DEG
    assert lo <= rat.um_per_deg <= hi
    assert rat.um_per_deg == pytest.approx(MOUSE_UM_PER_DEG * RAT_TO_MOUSE_SCALE)


def test_presets_are_eyes_with_sources_in_docstring():
    # common practice
    assert set(eye_names()) == {"human", "rat", "mouse"}
    for name, eye in EYE_PRESETS.items():
        assert isinstance(eye, Eye)
        assert eye.name == name
        # common practice: a transmission; its bound against Boettner & Wolter (1962) and
        # Hale & Querry (1973) is checked in tests/test_source_model.py
        assert 0.5 < eye.transmission <= 1.0
        assert "Hale & Querry" in eye.transmission_basis
    doc = eye_preset.__doc__ or ""
    assert "Drasdo" in doc and "Remtulla" in doc


def test_preset_overrides_and_errors():
    # common practice: some groups use 300 µm/deg for the human eye.
    eye = eye_preset("Human", um_per_deg=300.0)
    assert eye.um_per_deg == 300.0 and eye.pupil_diameter_mm == 7.0
    with pytest.raises(ConfigError) as err:
        eye_preset("cat")
    assert "human" in str(err.value) and err.value.field == "eye.preset"
    with pytest.raises(ConfigError):
        eye_preset("human", focal_mm=17.0)
    with pytest.raises(ConfigError) as err:
        eye_preset("human", um_per_deg=-1.0)
    assert err.value.field == "eye.um_per_deg"


# -- gratings and implants ----------------------------------------------------------


def test_grating_conversions_via_eye():
    # Source: definition of spatial frequency; 1 cycle/deg on a 288 µm/deg retina has a period
    # of 288 µm (Drasdo & Fowler 1974 scale).
    eye = eye_preset("human")
    assert ac.period_um_from_cpd(1.0, eye) == pytest.approx(288.0)
    assert ac.bar_width_um_from_cpd(2.0, eye) == pytest.approx(72.0)
    assert ac.cpd_from_bar_width_um(72.0, 288.0) == pytest.approx(2.0)
    assert ac.bar_width_px_from_um(110.0, 55.0) == pytest.approx(2.0)
    assert ac.cpd_from_bar_width_px(1.0, 100.0, eye) == pytest.approx(1.44)
    assert ac.bar_width_px_from_cpd(1.44, 100.0, eye) == pytest.approx(1.0)


def test_grating_logmar_equivalent():
    # common practice: the bar width is taken as the MAR, so 30 cycles/deg (bar 1 arcmin)
    # corresponds to 20/20 and 3 cycles/deg to 20/200.
    assert ac.logmar_from_cpd(30.0) == pytest.approx(0.0, abs=1e-12)
    assert ac.logmar_from_cpd(3.0) == pytest.approx(ac.logmar_from_snellen("20/200"))
    assert ac.cpd_from_logmar(1.0) == pytest.approx(3.0)


def test_nyquist_acuity_of_pixel_pitch():
    # Source: Lorach et al., Nat. Med. 21, 476 (2015); Ho et al., J. Neural Eng. 16, 066027
    # (2019): the finest resolved grating has a bar width of about one pixel pitch.
    eye = eye_preset("human")
    acu = ac.nyquist_acuity(100.0, eye)
    expected_cpd = eye.um_per_deg / (2 * 100.0)
    assert acu.cycles_per_deg == pytest.approx(expected_cpd)
    assert acu.bar_width_um == 100.0
    assert acu.logmar == pytest.approx(math.log10(30.0 / expected_cpd))
    with pytest.raises(ConfigError):
        ac.nyquist_acuity(0.0, eye)
    with pytest.raises(ConfigError):
        ac.implant_acuity(object(), eye)

"""A pixel's photodiodes: responsivity, diodes in series and the current in the readout."""

from __future__ import annotations

import math

import numpy as np
import pytest

from stimplan.errors import ConfigError
from stimplan.grid import RetinalGrid
from stimplan.implant import Implant, implant_preset, pixel_photocurrent_ua
from stimplan.sequence import SequenceError, parse_sequence

from .scenarios import gui_sequence

SQRT3 = math.sqrt(3.0)
#: h c / e in eV µm. Source: CODATA 2018 (h, c and e exact in the 2019 SI):
#: 6.62607015e-34 × 299792458 / 1.602176634e-19 = 1.23984198e-6 eV m.
HC_OVER_E_EV_UM = 6.62607015e-34 * 299792458.0 / 1.602176634e-19 * 1e6


def _uniform_readout(imp: Implant, e_mw_per_mm2: float, **kw):
    d = imp.pitch_um / 9.0
    grid = RetinalGrid((256, 256), d, d)
    return imp.readout(np.full(grid.shape, e_mw_per_mm2, np.float64), grid, **kw)


@pytest.mark.parametrize("n", [1, 2, 3])
def test_the_current_of_n_diodes_in_series_is_responsivity_times_power_over_n(n):
    # Source: Kirchhoff's current law: n equal photodiodes in series, each on 1/n of the
    # active area, pass one current, that of one diode lit by P/n: I = R P / n. Loudin et
    # al., IEEE Trans. Biomed. Circuits Syst. 5(5), 468 (2011), abstract: photovoltaic
    # circuits "consisting of one or more diodes connected in series".
    # from memory: Mathieson et al., Nat. Photonics 6, 391 (2012) built pixels of two or
    # three diodes in series (not found in the text we could read).
    imp = Implant(pitch_um=55.0, rings=2, active_fraction=0.6, diodes_in_series=n)
    e = 0.8  # mW/mm², uniform
    ro = _uniform_readout(imp, e, responsivity_a_per_w=0.4)
    # hexagonal cell area √3/2 p², photodiode 0.6 of it, in mm²; µW × A/W = µA
    area_mm2 = 0.6 * SQRT3 / 2.0 * 55.0**2 * 1e-6
    want_ua = 0.4 * (e * area_mm2 * 1e3) / n
    np.testing.assert_allclose(ro.photocurrent_ua, want_ua, rtol=1e-6)
    assert ro.diodes_in_series == n and not ro.responsivity_is_limit
    # the pure function: same closed form
    assert pixel_photocurrent_ua(
        6.0, responsivity_a_per_w=0.5, diodes_in_series=n
    ) == pytest.approx(3.0 / n)


def test_without_a_measured_responsivity_the_readout_uses_the_silicon_limit():
    # Source: one electron per photon, R = e λ / (h c) = λ[µm] / 1.23984 A/W (CODATA
    # 2018): 0.7098 A/W at 880 nm; an upper bound on any silicon photodiode.
    imp = implant_preset("rat_55um", rings=2)
    assert imp.responsivity_a_per_w is None and imp.diodes_in_series == 1
    ro = _uniform_readout(imp, 1.0)
    assert ro.responsivity_a_per_w == pytest.approx(0.880 / HC_OVER_E_EV_UM, rel=1e-9)
    assert ro.responsivity_is_limit
    np.testing.assert_allclose(ro.photocurrent_ua, ro.responsivity_a_per_w * ro.power_uw)


def test_the_vertical_junction_preset_carries_the_published_responsivity():
    # Source: Huang et al., J. Neural Eng. 18(3), 036015 (2021), abstract: "responsivity
    # at 880 nm wavelength as high as 0.51 A/W, with 85% internal quantum efficiency,
    # independent of pixel size" (vertical-junction photodiodes, 55-20 µm). Published
    # trend: the external quantum efficiency R / (e λ / h c) = 0.51 / 0.7098 = 0.72 lies
    # under the internal one (0.85), since reflection and absorption only lose photons.
    imp = implant_preset("rat_55um_vertical", rings=2)
    assert imp.responsivity_a_per_w == 0.51 and imp.diodes_in_series == 1
    limit = 0.880 / HC_OVER_E_EV_UM
    assert 0.51 / limit < 0.85
    ro = _uniform_readout(imp, 1.0, wavelength_nm=880.0)
    assert not ro.responsivity_is_limit
    np.testing.assert_allclose(ro.photocurrent_ua, 0.51 * ro.power_uw)


def test_a_responsivity_above_one_electron_per_photon_is_refused():
    # Source: e λ / (h c) at 880 nm = 0.7098 A/W and at 1000 nm = 0.8066 A/W (CODATA 2018)
    imp = Implant(pitch_um=55.0, rings=1, active_fraction=0.6, responsivity_a_per_w=0.75)
    with pytest.raises(ConfigError) as info:
        _uniform_readout(imp, 1.0, wavelength_nm=880.0)
    assert info.value.field == "implant.responsivity_a_per_w" and "0.7098" in str(info.value)
    ro = _uniform_readout(imp, 1.0, wavelength_nm=1000.0)  # under 0.8066 there
    assert ro.responsivity_a_per_w == 0.75
    # common practice: the plausibility range and the integer count name their fields
    with pytest.raises(ConfigError) as info:
        Implant(pitch_um=55.0, rings=1, active_fraction=0.6, responsivity_a_per_w=0.95)
    assert info.value.field == "implant.responsivity_a_per_w"
    for bad in (0, 2.5, 17, True):
        with pytest.raises(ConfigError) as info:
            Implant(pitch_um=55.0, rings=1, active_fraction=0.6, diodes_in_series=bad)
        assert info.value.field == "implant.diodes_in_series"


def test_the_sequence_file_takes_the_photodiode_keys_and_checks_them_at_its_wavelength():
    # common practice: the keys ride in [implant]; a responsivity over the silicon limit
    # at the file's own laser wavelength (880 nm: 0.7098 A/W) is refused at load, by key
    text = gui_sequence(1.0).replace(
        'preset = "rat_55um"',
        'preset = "rat_55um"\nresponsivity_a_per_w = 0.35\ndiodes_in_series = 2',
        1,
    )
    spec = parse_sequence(text)
    assert spec.implant.responsivity_a_per_w == 0.35 and spec.implant.diodes_in_series == 2
    with pytest.raises(SequenceError) as info:
        parse_sequence(text.replace("= 0.35", "= 0.8"))
    errs = info.value.errors
    assert [e.field for e in errs] == ["implant.responsivity_a_per_w"]
    assert errs[0].line is not None

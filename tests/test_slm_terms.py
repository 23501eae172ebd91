"""SLM lookup tables, measured correction phase and the Fresnel lens term."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan.holography import GreyLevelMap, IftaSettings, design_hologram, predict_retina
from stimplan.optics.system import SLM, Eye, Illumination, OpticalSystem, Relay
from stimplan.optics.target import Target


def test_linear_lookup_with_settable_2pi_grey():
    # common practice: an SLM calibrated so that grey g2pi gives 2 pi shows level k as
    # round(k g2pi / L)
    lut = GreyLevelMap.linear(8, grey_2pi=200)
    assert lut.level_grey.tolist() == [round(k * 200 / 8) for k in range(8)]
    np.testing.assert_allclose(lut.level_phase_rad, 2 * np.pi * np.arange(8) / 8, rtol=1e-6)
    lv = np.array([[0, 3], [7, 5]], np.uint8)
    assert np.array_equal(lut.levels_from_grey(lut.to_grey(lv)), lv)


def test_measured_lookup_table(tmp_path):
    # common practice: a measured grey -> phase curve; each level takes the grey whose
    # measured phase is nearest, and the realised phase is the measured one.
    grey = np.arange(256)
    phase = 2.2 * np.pi * (grey / 255.0) ** 1.3  # a non-linear, over-2pi response
    path = tmp_path / "lut.csv"
    path.write_text(
        "grey,phase_rad\n" + "\n".join(f"{g},{p:.6f}" for g, p in zip(grey, phase, strict=True))
    )
    lut = GreyLevelMap.from_table(path, 16)
    wanted = 2 * np.pi * np.arange(16) / 16
    err = np.angle(np.exp(1j * (lut.level_phase_rad - wanted)))
    assert np.max(np.abs(err)) < 0.05
    assert np.all(np.diff(lut.level_grey.astype(int)) > 0)
    bad = tmp_path / "bad.csv"
    bad.write_text("0,0\nnot numbers\n")
    from stimplan.errors import InputFileError

    with pytest.raises(InputFileError, match="slm.lut_file"):
        GreyLevelMap.from_table(bad, 16)


def _system(tmp_path=None, correction=None, fresnel=None, z=0.0):
    n = 128
    corr_file = None
    if correction is not None:
        corr_file = str(tmp_path / "corr.npy")
        np.save(corr_file, correction.astype(np.float32))
    return OpticalSystem(
        SLM(n, n, 8.0, 1.0, 256, zero_order_fraction=z),
        Illumination(880.0, 1.0, "flat", correction_phase_file=corr_file),
        Relay(1.0, fresnel_focal_mm=fresnel),
        Eye(288.0, 20.0, 1.0),
    )


def _spot_target(system):
    grid = system.design_grid()
    t = np.zeros(grid.shape, np.float32)
    r0, c0 = grid.centre_index
    t[r0 - 20, c0 + 25] = 1.0
    t[r0 + 15, c0 - 30] = 1.0
    return Target.from_intensity(t, grid)


def test_correction_phase_cancels_its_aberration(tmp_path):
    # Source: Goodman, 3rd ed., §7.2: a measured aberration W is corrected by showing -W
    # on the SLM; the prediction takes the system aberration as minus the correction.
    n = 128
    yy, xx = (np.mgrid[:n, :n] - n / 2) / (n / 2)
    corr = 3.0 * (xx**2 - yy**2) + 2.0 * xx * yy  # astigmatism-like, radians
    plain = _system()
    corrected = _system(tmp_path, correction=corr)
    st = IftaSettings(method="wgs", iterations=20, seed=4)
    h_plain = design_hologram(_spot_target(plain), plain, st)
    h_corr = design_hologram(_spot_target(corrected), corrected, st)
    assert not np.array_equal(h_plain.levels, h_corr.levels)
    p_plain = h_plain.predict(plain).sample_power_mw
    p_corr = h_corr.predict(corrected).sample_power_mw
    # same pattern up to the extra quantisation of the summed phase
    assert np.abs(p_corr - p_plain).sum() / p_plain.sum() < 0.02


def test_fresnel_lens_defocuses_the_zero_order():
    # Source: geometrical optics of a thin lens (Goodman, 3rd ed., §5.1): the unmodulated
    # square beam of side D, lacking the lens term, covers a square of side D f_eff / f_L
    # on the retina, uniformly (Fresnel number ~ 15 here, so geometry dominates).
    f_lens = 20.0
    focused = _system(z=0.2)
    defocused = _system(fresnel=f_lens, z=0.2)
    zero = np.zeros(focused.slm.shape)
    p_focus = predict_retina(zero, _system(z=0.2), oversample=2)
    lens_phase = defocused.fresnel_phase_rad()
    p_defocus = predict_retina(lens_phase, defocused, oversample=2)
    # modulated light is refocused (it carries the lens): the axis stays bright
    assert p_defocus.account.field_mw == pytest.approx(p_focus.account.field_mw, rel=1e-3)
    zero_only = _system(fresnel=f_lens, z=0.2)
    irr = predict_retina(lens_phase, zero_only, oversample=2).irradiance_mw_per_mm2
    mod_only = predict_retina(zero, _system(z=0.0), oversample=2).irradiance_mw_per_mm2
    zero_map = irr - 0.8 * mod_only  # what the zero order adds
    g = p_defocus.grid
    x, y = g.coords_um()
    side_um = focused.slm.width_mm * focused.effective_focal_mm / f_lens * 1e3
    total = float(zero_map.sum())

    def inside(half):
        return float(zero_map[(np.abs(x) <= half) & (np.abs(y) <= half)].sum()) / total

    assert inside(0.55 * side_um) > 0.9
    assert inside(0.25 * side_um) == pytest.approx(0.25, abs=0.05)  # uniform: area ratio
    assert zero_map.max() < 0.01 * (0.2 / 0.8) * mod_only.max()

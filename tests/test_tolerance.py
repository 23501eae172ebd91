"""Focusing errors, placement errors and the robust implant-aware design."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from stimplan.errors import ConfigError
from stimplan.grid import RetinalGrid
from stimplan.holography.propagation import RetinalPrediction, predict_retina
from stimplan.implant.layout import Implant
from stimplan.optics.aberration import FocusError, focus_error_phase_rad
from stimplan.tolerance import ToleranceRanges, analyse_tolerance, core_implant

from .conftest import make_system

N_VITREOUS = 1.336  # Source: Atchison & Smith, Optics of the Human Eye (2000), ch. 5 (from memory)


def _spot(system, error):
    """The retina of a flat phase (all light to one focused spot) with a focusing error."""
    phase = np.zeros(system.slm.shape, np.float32)
    pred = predict_retina(phase, system, focus_error_rad=focus_error_phase_rad(system, error))
    return pred.irradiance_mw_per_mm2.astype(np.float64), pred.grid


def _width_10_90_um(profile: np.ndarray, pitch_um: float) -> float:
    """Distance between the 10 % and 90 % points of a marginal's cumulative sum."""
    c = np.cumsum(profile) / profile.sum()
    x = np.arange(profile.size) * pitch_um
    return float(np.interp(0.9, c, x) - np.interp(0.1, c, x))


def _square_pupil_system(n: int, um_per_deg: float = 288.0):
    # a flat beam filling the square SLM, a pupil wider than it: the beam at the pupil is a
    # square of side N p M
    return make_system(n, profile="flat", magnification=0.5, um_per_deg=um_per_deg)


def test_defocus_blurs_a_spot_to_the_geometric_square():
    # Source: geometric optics (Keating, Geometric, Physical, and Visual Optics, 2nd ed.,
    # blur patch = pupil beam × ΔD × f; from memory): a uniform square beam of side W at
    # the pupil blurs into a uniform square of side W |ΔD| f, whose 10-90 % width is 0.8 of it
    # (the Fresnel number (W/2)² ΔD / λ is 24 here: edge diffraction is a few per cent).
    system = _square_pupil_system(512)
    w_mm = 512 * 8e-3 * 0.5
    f_mm = 288.0 * 180.0 / math.pi * 1e-3
    for dd in (20.0, -20.0):
        irr, grid = _spot(system, FocusError(defocus_d=dd))
        side_um = w_mm * abs(dd) * 1e-3 * f_mm * 1e3
        wx = _width_10_90_um(irr.sum(axis=0), grid.pitch_x_um)
        wy = _width_10_90_um(irr.sum(axis=1), grid.pitch_y_um)
        assert wx == pytest.approx(0.8 * side_um, rel=0.05)
        assert wy == pytest.approx(0.8 * side_um, rel=0.05)
    focused, grid = _spot(system, FocusError())
    assert _width_10_90_um(focused.sum(axis=0), grid.pitch_x_um) < 0.1 * side_um


def test_a_cylinder_blurs_along_its_meridian_only():
    # Source: geometric optics (a cylinder lens has power along one meridian; Keating 2002,
    # from memory): blur W C f along the axis meridian, none across it.
    system = _square_pupil_system(512)
    side_um = 512 * 8e-3 * 0.5 * 20.0 * 1e-3 * (288.0 * 180.0 / math.pi * 1e-3) * 1e3
    along_x, grid = _spot(system, FocusError(cylinder_d=20.0, cylinder_axis_deg=0.0))
    along_y, _ = _spot(system, FocusError(cylinder_d=20.0, cylinder_axis_deg=90.0))
    px = grid.pitch_x_um
    assert _width_10_90_um(along_x.sum(axis=0), px) == pytest.approx(0.8 * side_um, rel=0.05)
    assert _width_10_90_um(along_x.sum(axis=1), px) < 0.1 * side_um
    assert _width_10_90_um(along_y.sum(axis=1), px) == pytest.approx(0.8 * side_um, rel=0.05)
    assert _width_10_90_um(along_y.sum(axis=0), px) < 0.1 * side_um


def test_depth_behind_the_focus_blurs_as_the_cone_of_light():
    # Source: similar triangles: the light converges in the vitreous (index n') over the
    # image-side focal length n' f, so photodiodes Δz behind the focus see a patch
    # W Δz / (n' f) (Keating 2002, from memory; Atchison & Smith 2000 for n', from memory).
    um_per_deg = 87.0  # a small (rat-sized) eye: f about 5 mm
    system = _square_pupil_system(512, um_per_deg)
    f_mm = um_per_deg * 180.0 / math.pi * 1e-3
    dz_um = 600.0  # Fresnel number about 21
    side_um = (512 * 8e-3 * 0.5) * dz_um / (N_VITREOUS * f_mm)
    irr, grid = _spot(system, FocusError(depth_um=dz_um))
    wx = _width_10_90_um(irr.sum(axis=0), grid.pitch_x_um)
    assert wx == pytest.approx(0.8 * side_um, rel=0.05)


def test_no_error_gives_the_plain_prediction():
    # common practice: a zero perturbation is the identity
    system = make_system(64)
    rng = np.random.default_rng(3)
    phase = rng.uniform(0, 2 * np.pi, system.slm.shape).astype(np.float32)
    a = predict_retina(phase, system).irradiance_mw_per_mm2
    assert focus_error_phase_rad(system, FocusError()) is None
    zero = np.zeros(system.slm.shape, np.float32)
    b = predict_retina(phase, system, focus_error_rad=zero).irradiance_mw_per_mm2
    np.testing.assert_allclose(b, a, rtol=1e-5, atol=1e-7 * float(a.max()))


def test_an_aliased_error_is_refused_with_the_limit():
    # Source: sampling theorem: the phase step between pixels must stay below π
    # (λ / (M² W p) = 880e-6 / (0.25 * 2.048 * 8e-3) /mm = 214.8 D for this SLM)
    # in an eye of f = 2.98 mm, 2000 µm of depth is 2e-3 / (1.336 * 2.98e-3²) = 169 D more
    system = _square_pupil_system(256, um_per_deg=52.0)
    too_much = FocusError(defocus_d=30.0, cylinder_d=30.0, depth_um=2000.0)
    with pytest.raises(ConfigError, match=r"214\.8"):
        focus_error_phase_rad(system, too_much)
    focus_error_phase_rad(system, FocusError(defocus_d=30.0, cylinder_d=30.0))  # sampled


@pytest.mark.parametrize(
    "kwargs, field",
    [
        ({"defocus_d": -1.0}, "tolerance.defocus_d"),
        ({"defocus_d": (2.0, 1.0)}, "tolerance.defocus_d"),
        ({"shift_um": -5.0}, "tolerance.shift_um"),
        ({"magnification_error": 0.5}, "tolerance.magnification_error"),
        ({"cylinder_d": 40.0}, "tolerance.cylinder_d"),
        ({"depth_um": (0.0, 5000.0)}, "tolerance.depth_um"),
    ],
)
def test_bad_ranges_name_the_field(kwargs, field):
    with pytest.raises(ConfigError) as err:
        ToleranceRanges(**kwargs)
    assert err.value.field.startswith(field)


class _FixedMap:
    """A stand-in hologram whose prediction is a given map (the focus error is ignored)."""

    def __init__(self, irr, grid):
        self.irr, self.grid = irr, grid

    def predict(self, system, *, oversample=2, focus_error_rad=None):
        return RetinalPrediction(self.irr, self.grid, None, oversample, (0.0, 0.0), ())


def _small_implant():
    return Implant(
        pitch_um=50.0,
        layout="square",
        outline="square",
        rows=3,
        cols=3,
        active_shape="square",
        active_diameter_um=30.0,
        name="test",
    )


def test_placement_errors_on_a_ramp_and_a_uniform_map():
    # Source: closed form. On E(x) = a + b x a centred square photodiode of area A holds
    # A (a + b x_c); moved by dx it holds A b dx more. On a uniform map E, an image scaled
    # by 1 + ε spreads the same power over (1 + ε)² the area: A E / (1 + ε)².
    system = make_system(64)
    grid = RetinalGrid((400, 400), 1.0, 1.0)
    x = (np.arange(400) - 200) * 1.0
    a_irr, b_irr = 1.0, 0.002  # mW/mm² and mW/mm² per µm
    ramp = np.broadcast_to((a_irr + b_irr * x)[None, :], (400, 400)).astype(np.float32)
    implant = _small_implant()
    on = np.ones(9, bool)
    on[4] = False
    res = analyse_tolerance(
        _FixedMap(np.ascontiguousarray(ramp), grid),
        system,
        implant,
        on,
        ranges=ToleranceRanges(shift_um=20.0),
    )
    area_mm2 = 30.0 * 30.0 * 1e-6
    # the ON pixel with the lowest power is in the left column (x_c = -50 µm)
    expect_nominal_uw = area_mm2 * (a_irr + b_irr * -50.0) * 1e3
    assert res.nominal.on_min_uw == pytest.approx(expect_nominal_uw, rel=1e-3)
    # the worst shift is 20 µm to -x
    assert res.worst_on.shift_x_um == pytest.approx(-20.0)
    assert res.worst_on.on_min_uw == pytest.approx(
        area_mm2 * (a_irr + b_irr * -70.0) * 1e3, rel=1e-3
    )
    assert res.worst_off.off_max_uw == pytest.approx(
        area_mm2 * (a_irr + b_irr * 20.0) * 1e3, rel=1e-3
    )
    uniform = np.full((400, 400), 2.0, np.float32)
    res = analyse_tolerance(
        _FixedMap(uniform, grid),
        system,
        implant,
        on,
        ranges=ToleranceRanges(magnification_error=0.1),
    )
    assert res.worst_on.on_min_uw == pytest.approx(area_mm2 * 2.0 / 1.1**2 * 1e3, rel=1e-3)
    assert res.worst_on.magnification_error == pytest.approx(0.1)
    assert len(res.cases) == 3


def test_the_cases_cover_the_range_ends():
    # common practice: a tolerance range is checked at its ends and at the nominal value
    r = ToleranceRanges(defocus_d=(-1.0, 2.0), cylinder_d=0.5, shift_um=10.0)
    errors = r.focus_errors()
    assert errors[0].is_zero
    assert {e.defocus_d for e in errors} == {-1.0, 0.0, 2.0}
    assert {e.cylinder_axis_deg for e in errors if e.cylinder_d} == {0.0, 45.0, 90.0, 135.0}
    assert len(errors) == 3 * (1 + 2 * 4)
    places = r.placements()
    assert places[0] == (0.0, 0.0, 0.0)
    assert len(places) == 9
    assert max(math.hypot(x, y) for x, y, _ in places) == pytest.approx(10.0)


def test_a_core_is_the_photodiode_less_the_margin():
    # common practice: a blur of diameter b keeps a core of size s - b inside the photodiode
    implant = _small_implant()
    core = core_implant(implant, margin_um=10.0)
    assert core.active_size_um == pytest.approx(20.0)
    assert core_implant(implant, margin_um=50.0).active_size_um == pytest.approx(0.25 * 30.0)
    assert dataclasses.replace(core, active_diameter_um=30.0).active_area_um2 == pytest.approx(
        implant.active_area_um2
    )


def test_the_zero_order_focuses_where_the_eyes_error_cancels_the_lens_term():
    # Source: thin-lens optics (Goodman, Introduction to Fourier Optics, 3rd ed., §5.1): the
    # lens term -π r²/(λ f) on the SLM is a power 1/f, 1/(f M²) at the pupil; an eye that
    # adds it focuses the zero order and defocuses the modulated light by as much. For a
    # symmetric beam, defocus by ±ΔD gives the same intensity (the far fields are complex
    # conjugates, mirrored), so with half the light unmodulated the two maps agree.
    base = make_system(256, magnification=0.5, profile="flat")  # a beam filling the SLM
    f_mm = 200.0
    system = dataclasses.replace(
        base,
        slm=dataclasses.replace(base.slm, zero_order_fraction=0.5),
        relay=dataclasses.replace(base.relay, fresnel_focal_mm=f_mm),
    )
    d0 = 1e3 / (f_mm * 0.5**2)  # 20 D
    from stimplan.optics.aberration import zero_order_focus_d

    assert zero_order_focus_d(system) == pytest.approx(d0)
    lens = system.fresnel_phase_rad()  # the displayed phase of a flat design: the lens alone
    nominal = predict_retina(lens, system).irradiance_mw_per_mm2
    err = focus_error_phase_rad(system, FocusError(defocus_d=d0))
    swapped = predict_retina(lens, system, focus_error_rad=err).irradiance_mw_per_mm2
    np.testing.assert_allclose(swapped, nominal, rtol=1e-3, atol=1e-4 * float(nominal.max()))
    half = focus_error_phase_rad(system, FocusError(defocus_d=d0 / 2))
    between = predict_retina(lens, system, focus_error_rad=half).irradiance_mw_per_mm2
    # neither light is focused (Fresnel number (W/2)² ΔD / λ = 3 for each)
    assert float(between.max()) < 0.5 * float(nominal.max())
    # a tolerance range that reaches it is refused: the estimate does not cover that eye
    with pytest.raises(ConfigError, match=r"tolerance\.defocus_d.*\+20 D"):
        ToleranceRanges(defocus_d=(0.0, 25.0)).check_zero_order(system)
    ToleranceRanges(defocus_d=5.0).check_zero_order(system)

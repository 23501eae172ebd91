"""The source and bench model: polarisation, spatial coherence, SLM and relay losses,
and each species' ocular transmission at the wavelength."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from scipy import ndimage

from stimplan.budget import BUDGET_LABELS, light_budget
from stimplan.errors import ConfigError
from stimplan.grid import RetinalGrid
from stimplan.holography.propagation import predict_retina
from stimplan.holography.source_blur import blur_power_map, disc_kernel
from stimplan.optics.eye import MOUSE_UM_PER_DEG, RAT_TO_MOUSE_SCALE, eye_preset
from stimplan.optics.ocular import water_path_transmission
from stimplan.optics.source import SourceBlur, modulated_share
from stimplan.optics.system import SLM, Eye, Illumination, OpticalSystem, Relay
from stimplan.sequence import parse_sequence
from stimplan.sequence.report import SequenceError

from .conftest import make_system
from .scenarios import header

N = 128


def _system(
    *,
    n: int = N,
    fill_factor: float = 1.0,
    zero_order_fraction: float = 0.0,
    reflectance: float = 1.0,
    relay_transmission: float = 1.0,
    waist_mm: float = 0.08,
    power_mw: float = 1.0,
    **illum,
) -> OpticalSystem:
    return OpticalSystem(
        SLM(
            n,
            n,
            8.0,
            fill_factor,
            256,
            zero_order_fraction=zero_order_fraction,
            reflectance=reflectance,
        ),
        Illumination(880.0, power_mw, "gaussian", waist_mm, **illum),
        Relay(1.0, transmission=relay_transmission),
        Eye(288.0, 20.0, 1.0),
    )


def _rms_widths_um(pred) -> tuple[float, float]:
    """Second-moment widths (standard deviations) of the retinal map along x and y."""
    irr = pred.irradiance_mw_per_mm2.astype(np.float64)
    x, y = pred.grid.coords_um()
    w = irr / irr.sum()
    mx, my = float((w * x).sum()), float((w * y).sum())
    return (
        math.sqrt(float((w * (x - mx) ** 2).sum())),
        math.sqrt(float((w * (y - my) ** 2).sum())),
    )


# -- polarisation ----------------------------------------------------------------------


@pytest.mark.parametrize(
    ("p", "theta_deg"), [(1.0, 0.0), (1.0, 30.0), (1.0, 45.0), (0.6, 0.0), (0.0, 17.0), (0.3, 70.0)]
)
def test_modulated_share_matches_the_coherency_matrix(p, theta_deg):
    # Source: Born & Wolf, Principles of Optics, 7th ed., §10.8-10.9 (coherency matrix of
    # partially polarised light: P times a polarised state plus (1 - P)/2 times the
    # identity; the intensity in a direction is the matrix's diagonal element there;
    # section numbers from memory). Built here with numpy in the director's frame.
    t = math.radians(theta_deg)
    jones = np.array([math.cos(t), math.sin(t)])
    coherency = p * np.outer(jones, jones) + (1.0 - p) / 2.0 * np.eye(2)
    assert modulated_share(p, theta_deg) == pytest.approx(coherency[0, 0], abs=1e-12)


def test_unpolarised_light_sends_half_to_the_zero_order(rng):
    # Source: Born & Wolf, §10.9: unpolarised light holds half its intensity in each of two
    # orthogonal polarisations; the SLM modulates one, the other is its zero order. The
    # unmodulated beam focuses to the zero-order spot whatever the hologram (Goodman, §5.2),
    # all of it in the central order to within the pixel envelope, sinc^2(k / 2N) ~ 1 - 1e-3
    # over the spot (Goodman §4.2.2, eq. 4-28).
    system = _system(degree_of_polarisation=0.0)
    phase = rng.uniform(0, 2 * np.pi, (N, N))
    acc = predict_retina(phase, system).account
    assert acc.zero_order_mw == pytest.approx(0.5, rel=2e-3)
    assert acc.cross_polarised_mw == pytest.approx(acc.zero_order_mw, rel=1e-9)
    assert acc.total_mw() == pytest.approx(1.0, rel=1e-6)
    # a flat hologram: the modulated half lands in the same spot, the other half still counts
    # as zero order
    acc = predict_retina(np.zeros((N, N)), system).account
    assert acc.zero_order_mw == pytest.approx(0.5, rel=2e-3)
    assert acc.field_mw == pytest.approx(0.5, rel=2e-3)


def test_polarisation_and_the_slm_zero_order_combine(rng):
    # Source: Born & Wolf, §1.4 (Malus's law): polarised light at 60 degrees to the director
    # passes cos^2(60) = 1/4 into the modulated polarisation; of that the SLM leaves z = 0.2
    # unmodulated, so the zero order holds 3/4 + 1/4 x 0.2 = 0.8 of the light (derived by
    # hand), its cross-polarised part 3/4.
    system = _system(zero_order_fraction=0.2, polarisation_angle_deg=60.0)
    acc = predict_retina(rng.uniform(0, 2 * np.pi, (N, N)), system).account
    assert acc.zero_order_mw == pytest.approx(0.8, rel=2e-3)
    assert acc.cross_polarised_mw == pytest.approx(0.75, rel=2e-3)


# -- SLM reflectance and relay transmission -----------------------------------------------


def test_reflectance_and_relay_are_their_own_lines_and_the_sums_close(rng):
    # common practice (energy conservation; losses in series multiply): 2 mW on an SLM of
    # fill factor 0.9 that reflects 70 % into a relay passing 90 %: the SLM keeps
    # 0.3 x 0.9 x 2 = 0.54 mW, the relay 0.7 x 0.1 x 0.9 x 2 = 0.126 mW (by hand).
    kw = {"fill_factor": 0.9, "power_mw": 2.0, "zero_order_fraction": 0.05}
    phase = rng.uniform(0, 2 * np.pi, (N, N))
    ideal = predict_retina(phase, _system(**kw)).account
    lossy = predict_retina(phase, _system(reflectance=0.7, relay_transmission=0.9, **kw)).account
    assert lossy.slm_absorbed_mw == pytest.approx(0.54, rel=1e-9)
    assert lossy.relay_lost_mw == pytest.approx(0.126, rel=1e-9)
    assert lossy.total_mw() == pytest.approx(2.0, rel=1e-6)
    for name in ("retina_mw", "higher_orders_mw", "zero_order_mw", "field_mw"):
        assert getattr(lossy, name) == pytest.approx(0.63 * getattr(ideal, name), rel=1e-5)
    budget = light_budget(
        lossy,
        slm_fraction=1.0,
        fill_factor=0.9,
        zero_order_fraction=0.05,
        phase_levels=256,
        eye_transmission=1.0,
        retina_mw=lossy.retina_mw,
        footprint_mw=0.0,
        on_photodiodes_mw=0.0,
        off_photodiodes_mw=0.0,
    )
    assert budget.total_mw() == pytest.approx(2.0, rel=1e-6)
    assert budget.slm_absorbed_mw == pytest.approx(0.54) and "slm_absorbed_mw" in BUDGET_LABELS
    assert budget.relay_lost_mw == pytest.approx(0.126) and "relay_lost_mw" in BUDGET_LABELS
    # deliverable: 2 x 0.9 x 0.63 through to the pupil, 0.95 modulated, the central order's
    # peak share ff = 0.9 (derived by hand)
    assert budget.deliverable_mw == pytest.approx(2 * 0.9 * 0.63 * 0.95 * 0.9, rel=1e-9)


# -- spatial coherence --------------------------------------------------------------------


@pytest.mark.parametrize("sigma_um", [0.7, 2.3, 9.0])
def test_gaussian_blur_matches_scipy_gaussian_filter(sigma_um, rng):
    # Source: scipy.ndimage.gaussian_filter (a sampled Gaussian of unit sum; mode "wrap" for
    # the circular convolution), as the reference function, on a grid of unequal pitches.
    grid = RetinalGrid((96, 80), 1.3, 1.1)
    power = rng.uniform(0, 1, grid.shape).astype(np.float32)
    power[40, 30] = 50.0
    got = blur_power_map(power, grid, SourceBlur("gaussian", sigma_um))
    want = ndimage.gaussian_filter(
        power.astype(np.float64),
        sigma=(sigma_um / grid.pitch_y_um, sigma_um / grid.pitch_x_um),
        mode="wrap",
        truncate=12.0,
    )
    assert got.dtype == np.float32
    np.testing.assert_allclose(got, want, rtol=1e-4, atol=1e-5 * float(want.max()))
    # energy preserved (the kernel sums to 1)
    assert float(got.sum(dtype=np.float64)) == pytest.approx(float(power.sum()), rel=1e-5)


def test_a_point_blurred_by_a_disc_has_the_disc_second_moment():
    # Source: a uniform disc of radius R has the second moment R^2 / 4 along each axis
    # (closed form: the integral of x^2 over the disc over its area); the cells' own width
    # adds 1/12 of a sample^2 (a uniform cell), within the 1 % checked.
    grid = RetinalGrid((200, 200), 1.0, 1.0)
    power = np.zeros(grid.shape, np.float32)
    power[100, 100] = 1.0
    radius_um = 25.0
    out = blur_power_map(power, grid, SourceBlur("disc", radius_um))
    x, _ = grid.coords_um()
    w = out.astype(np.float64) / out.sum()
    var_x = float((w * (x - float((w * x).sum())) ** 2).sum())
    assert var_x == pytest.approx(radius_um**2 / 4.0, rel=1e-2)
    # and its area is the disc's: pi R^2 samples lit, each holding 1 / (pi R^2)
    assert float(out.max()) == pytest.approx(1.0 / (math.pi * radius_um**2), rel=2e-2)
    kern = disc_kernel(grid.shape, (radius_um, radius_um))
    assert kern.sum() == pytest.approx(1.0) and kern.min() >= 0


@pytest.mark.parametrize("m_squared", [1.0, 2.0, 3.0])
def test_a_multimode_beam_focuses_m_squared_times_wider(m_squared):
    # Source: ISO 11146-1:2005 (from memory) and Siegman, Lasers (1986), ch. 17: a beam of
    # waist w0 and beam propagation ratio M^2 diverges with the 1/e^2 half-angle
    # M^2 lambda / (pi w0), so its focus at f_eff has the rms width (half the 1/e^2 radius)
    # f_eff M^2 lambda / (2 pi w0). The unmodulated spot of a flat hologram is that focus.
    system = _system(fill_factor=0.5, m_squared=m_squared)
    pred = predict_retina(np.zeros((N, N)), system)
    f_eff_um = 288.0 * 180.0 / math.pi  # 288 um/deg, relay 1x
    want = f_eff_um * m_squared * 0.88e-3 / (2.0 * math.pi * 0.08)  # lambda, w0 in mm
    sx, sy = _rms_widths_um(pred)
    assert sx == pytest.approx(want, rel=1e-2)
    assert sy == pytest.approx(want, rel=1e-2)
    assert pred.account.total_mw() == pytest.approx(1.0, rel=1e-6)
    assert float(pred.sample_power_mw.sum(dtype=np.float64)) == pytest.approx(
        pred.account.retina_mw, rel=1e-4
    )


def test_a_fibre_blurs_by_its_angular_spread():
    # Source: van Cittert-Zernike (Mandel & Wolf, Optical Coherence and Quantum Optics,
    # §4.4, from memory): a fibre core of diameter d at the focus of a collimator f_c lights
    # the SLM with angles filling a disc of half-angle (d/2) / f_c; the collimated beam's
    # radius is R = f_c NA. Here d = 8 um, NA = 0.1, R = 0.08 mm: f_c = R / NA, so the disc
    # on the retina has radius f_eff (d/2) / f_c (derived by hand), and the spot's second
    # moment is the coherent focus's plus the disc's R_disc^2 / 4 (second moments add).
    system = _system(fibre_core_um=8.0, fibre_na=0.1, fill_factor=0.5)
    f_eff_mm = 288.0 * 180.0 / math.pi * 1e-3
    f_c_mm = 0.08 / 0.1
    radius_um = f_eff_mm * (0.004 / f_c_mm) * 1e3
    blur = system.source_blur()
    assert blur.kind == "disc"
    assert blur.size_um == pytest.approx(radius_um, rel=1e-12)
    pred = predict_retina(np.zeros((N, N)), system)
    coherent_um = f_eff_mm * 1e3 * 0.88e-3 / (2.0 * math.pi * 0.08)
    sx, _ = _rms_widths_um(pred)
    assert sx == pytest.approx(math.sqrt(coherent_um**2 + radius_um**2 / 4.0), rel=1.5e-2)


@pytest.mark.parametrize("blur", [SourceBlur("gaussian", 3.0), SourceBlur("disc", 6.0)])
def test_a_blurred_map_never_holds_more_in_a_disc_than_the_unblurred_one(blur, rng):
    # common practice (a unit-sum, non-negative kernel averages): the blurred map's power
    # in a disc is a weighted mean of the unblurred map's powers in shifted discs. Disc
    # sums here by scipy.ndimage.convolve with a disc footprint, mode "wrap".
    grid = RetinalGrid((64, 64), 1.0, 1.0)
    power = (rng.uniform(0, 1, grid.shape) ** 8).astype(np.float32)
    yy, xx = np.mgrid[-5:6, -5:6]
    footprint = (xx**2 + yy**2 <= 25).astype(np.float64)
    before = ndimage.convolve(power.astype(np.float64), footprint, mode="wrap").max()
    blurred = blur_power_map(power, grid, blur).astype(np.float64)
    after = ndimage.convolve(blurred, footprint, mode="wrap").max()
    assert after <= before * (1 + 1e-5)


def test_single_mode_is_the_default_and_leaves_the_map_alone(rng):
    # common practice: a single-mode laser (M^2 = 1), polarised along the director, and a
    # lossless SLM and relay are the defaults; the map is then the coherent prediction.
    ill = Illumination()
    assert ill.single_mode and ill.modulated_share == 1.0
    assert SLM().reflectance == 1.0 and Relay().transmission == 1.0
    system = make_system(64)
    assert not system.source_blur().active
    power = rng.uniform(0, 1, (8, 8)).astype(np.float32)
    assert blur_power_map(power, RetinalGrid((8, 8), 1.0, 1.0), SourceBlur()) is power


# -- ocular transmission -------------------------------------------------------------------


def test_water_path_is_beer_lambert_with_the_published_absorption():
    # Source: Hale & Querry, Appl. Opt. 12, 555 (1973), Table 1, as alpha = 4 pi k / lambda:
    # 0.056 /cm at 875 nm and 0.068 /cm at 900 nm (read from a public tabulation of that
    # table in 1/cm); Beer-Lambert T = exp(-alpha L).
    assert water_path_transmission(wavelength_nm=875, water_path_mm=16.5) == pytest.approx(
        math.exp(-0.0056 * 16.5), rel=1e-12
    )
    # Source: water's k = 2.93e-7 at 850 nm, as quoted in a second public data file (from
    # memory that it is Hale & Querry's Table 1 value): alpha = 4 pi k / lambda = 0.0433 /cm,
    # the table's 0.043 /cm to within 1 %.
    alpha_850_per_mm = 4 * math.pi * 2.93e-7 / 850e-6
    assert water_path_transmission(wavelength_nm=850, water_path_mm=10.0) == pytest.approx(
        math.exp(-alpha_850_per_mm * 10.0), rel=1e-3
    )
    # between table wavelengths the lower absorption of the two (an upper bound of T)
    assert water_path_transmission(wavelength_nm=890, water_path_mm=10.0) == pytest.approx(
        math.exp(-0.0056 * 10.0), rel=1e-12
    )


def test_smaller_eyes_pass_more_light_at_880_nm():
    # Source: Beer-Lambert over each eye's effective focal length (um/deg x 180 / pi), with
    # Hale & Querry's 0.056 /cm at 875-900 nm (the lower of the two neighbours of 880 nm);
    # the rat eye is the mouse eye scaled 1.9-2.0x (Remtulla & Hallett, Vision Res. 25, 21
    # (1985)), the human 288 um/deg (Drasdo & Fowler 1974). Expected values derived here.
    alpha_per_mm = 0.0056
    want = {
        "human": math.exp(-alpha_per_mm * 288.0 * 180 / math.pi * 1e-3),
        "rat": math.exp(
            -alpha_per_mm * MOUSE_UM_PER_DEG * RAT_TO_MOUSE_SCALE * 180 / math.pi * 1e-3
        ),
        "mouse": math.exp(-alpha_per_mm * MOUSE_UM_PER_DEG * 180 / math.pi * 1e-3),
    }
    got = {name: eye_preset(name, wavelength_nm=880).transmission for name in want}
    for name in want:
        assert got[name] == pytest.approx(want[name], rel=1e-12)
    assert got["mouse"] > got["rat"] > got["human"]


@pytest.mark.parametrize("wavelength_nm", [650, 700, 750, 800, 850])
def test_human_bound_is_not_below_the_measured_whole_eye_transmittance(wavelength_nm):
    # Source: Boettner & Wolter, Invest. Ophthalmol. 1, 776 (1962), abstract: the maximum
    # total transmittance of the whole eye, about 84 %, is reached between 650 and 850 nm.
    # An upper bound must not fall below a measurement.
    assert eye_preset("human", wavelength_nm=wavelength_nm).transmission >= 0.84


def test_the_water_band_near_970_nm_darkens_the_eye():
    # Source: Hale & Querry (1973): water absorbs 0.45 /cm at 975 nm against 0.020 /cm at
    # 800 nm, so each eye passes less there.
    for name in ("human", "rat", "mouse"):
        t800 = eye_preset(name, wavelength_nm=800).transmission
        t975 = eye_preset(name, wavelength_nm=975).transmission
        assert t975 < t800


def test_outside_the_table_a_measured_transmission_is_needed():
    # common practice: no bound can be read beyond the table's 1000 nm (Hale & Querry give
    # 1.0 and 1.2 um only); refuse rather than extrapolate.
    with pytest.raises(ConfigError) as err:
        eye_preset("rat", wavelength_nm=1064)
    assert err.value.field == "eye.transmission" and "1000" in str(err.value)
    eye = eye_preset("rat", wavelength_nm=1064, transmission=0.9)
    assert eye.transmission == 0.9 and eye.transmission_basis == "given"


def test_a_sequence_eye_gets_the_transmission_at_its_laser_wavelength():
    # Source: Hale & Querry (1973): 0.068 /cm at 900 nm and 0.144 /cm at 925 nm; at 905 nm
    # the lower, over the rat's effective focal length (derived by hand).
    text = header(128, title="transmission at 905 nm").replace(
        "wavelength_nm = 880", "wavelength_nm = 905"
    )
    text += '[stimuli.dot]\nkind = "spot"\ndiameter_um = 200\n'
    text += '[[steps]]\nstimulus = "dot"\nduration_ms = 100\npulse_ms = 10\nrate_hz = 10\n'
    spec = parse_sequence(text)
    f_mm = MOUSE_UM_PER_DEG * RAT_TO_MOUSE_SCALE * 180 / math.pi * 1e-3
    assert spec.system.eye.transmission == pytest.approx(math.exp(-0.0068 * f_mm), rel=1e-12)


# -- errors -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"degree_of_polarisation": 1.2}, "illumination.degree_of_polarisation"),
        ({"m_squared": 0.8}, "illumination.m_squared"),
        ({"fibre_core_um": 50.0}, "illumination.fibre_na"),
        ({"fibre_core_um": 50.0, "fibre_na": 1.5}, "illumination.fibre_na"),
        ({"fibre_core_um": 50.0, "fibre_na": 0.2, "m_squared": 2.0}, "illumination.m_squared"),
        ({"m_squared": 2.0, "profile": "flat"}, "illumination.m_squared"),
        ({"polarisation_angle_deg": 90.0}, "illumination.polarisation_angle_deg"),
    ],
)
def test_bad_source_values_name_their_field(kwargs, field):
    # common practice: the error names the field, the value and the allowed range
    kw = {"profile": "gaussian", **kwargs}
    with pytest.raises(ConfigError) as err:
        Illumination(880.0, 1.0, kw.pop("profile"), 1.0, **kw)
    assert err.value.field == field
    assert err.value.allowed


def test_bad_loss_values_name_their_field():
    # common practice
    with pytest.raises(ConfigError) as err:
        SLM(reflectance=0.0)
    assert err.value.field == "slm.reflectance" and "(0, 1]" in str(err.value)
    with pytest.raises(ConfigError) as err:
        Relay(transmission=1.2)
    assert err.value.field == "relay.transmission"


def test_sequence_keys_of_the_source_are_checked_at_their_key():
    # common practice: a wrong value is reported under the file's own key
    text = header(128, title="bad source").replace(
        'profile = "gaussian"', 'profile = "gaussian"\nm_squared = 0.5\nfibre_na = 0.2'
    )
    text = text.replace("[optics.relay]", "[optics.relay]\ntransmission = 0")
    with pytest.raises(SequenceError) as err:
        parse_sequence(text + '[stimuli.dot]\nkind = "spot"\ndiameter_um = 200\n')
    fields = {e.field for e in err.value.errors}
    assert "optics.laser.m_squared" in fields
    assert "optics.relay.transmission" in fields


def test_the_prediction_notes_say_what_the_source_does(rng):
    # common practice: the notes name the unmodulated polarisation and the blur
    system = _system(degree_of_polarisation=0.5, m_squared=1.5)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        pred = predict_retina(rng.uniform(0, 2 * np.pi, (N, N)), system)
    text = " ".join(pred.notes)
    assert "25.0% of the light" in text  # (1 - 0.5) / 2, by hand
    assert "blurred by the source's angular spread" in text


# -- the report shows the loss chain ---------------------------------------------------------


def test_summary_and_report_show_the_loss_chain():
    # common practice (energy conservation): with every loss of the bench switched on, the
    # light budget's entries still sum to the laser power (within 0.1 %), each loss is its
    # own line, and the table and the report print the chain with the cautions.
    import io

    from stimplan.cautions import CAUTIONS
    from stimplan.plan import plan_sequence
    from stimplan.present.report import render_report
    from stimplan.present.summary import plan_summary, print_table

    from .scenarios import gui_sequence

    text = gui_sequence(1.0).replace(
        'profile = "gaussian"', 'profile = "gaussian"\ndegree_of_polarisation = 0.8'
    )
    text = text.replace("phase_levels = 256", "phase_levels = 256\nreflectance = 0.75")
    text = text.replace("[optics.relay]", "[optics.relay]\ntransmission = 0.9")
    plan = plan_sequence(parse_sequence(text), progress=False)
    try:
        summary = plan_summary(plan)
        src = summary["source_and_losses"]
        assert src["modulated_share"] == pytest.approx(0.9)  # (1 + 0.8) / 2, by hand
        assert src["slm_reflectance"] == 0.75 and src["relay_transmission"] == 0.9
        assert "check it against the power" in src["note"]
        for row in summary["stimuli"]:
            b = row["light_budget"]
            assert sum(b[k] for k in BUDGET_LABELS) == pytest.approx(b["laser_mw"], rel=1e-3)
            # 25 % of the light on the pixels is not reflected (fill factor 0.93, by hand)
            on_slm = row["laser_power_mw"]
            assert b["slm_absorbed_mw"] == pytest.approx(0.25 * 0.93 * on_slm, rel=1e-9)
            assert b["relay_lost_mw"] == pytest.approx(0.75 * 0.1 * 0.93 * on_slm, rel=1e-9)
            assert b["cross_polarised_mw"] > 0
        out = io.StringIO()
        print_table(plan, file=out)
        table = out.getvalue()
        assert "source and loss chain" in table and "not reflected by the SLM" in table
        assert "lost in the relay" in table and CAUTIONS in table
        html = render_report(plan)
        assert "source and loss chain" in html and "SLM reflectance" in html
    finally:
        plan.close()

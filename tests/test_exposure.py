"""Retinal exposure limits, pulse-train rules and the extended-source evaluation.

Sources (see /work/shared/REFERENCES.md, "Retinal exposure limits"):
ICNIRP, Health Phys. 105, 271 (2013); IEC 60825-1:2014, Annex A; the
correction-factor structure as reproduced in Directive 2006/25/EC, Annex II.
The 2013/2014 breakpoints and table values are recalled, not checked against
the text: tests that use them say ``# from memory``. Expected values are
derived here from the formulas, never pasted from the code's output.
"""

from __future__ import annotations

import math
import tracemalloc
from dataclasses import replace

import numpy as np
import pytest
import scipy.fft as sfft

from stimplan import exposure as ex
from stimplan.cautions import CAUTION_SHORT, CAUTIONS, EDITION
from stimplan.errors import ConfigError
from stimplan.grid import RetinalGrid

# Cornea -> retina, REFERENCES.md: 7 mm limiting aperture [pub], f_eye = 17 mm
# for the human eye, ocular transmission about 0.8 at 880-905 nm [mem].
A7_M2 = math.pi * (3.5e-3) ** 2
F_EYE_MM = 17.0
TAU = 0.8


def retinal_energy_limit_mj(h_j_per_m2: float) -> float:
    """Retinal energy at a corneal radiant exposure H: tau * H * A_7mm (REFERENCES.md)."""
    return TAU * h_j_per_m2 * A7_M2 * 1e3


def c_a_formula(lam: float) -> float:
    # Directive 2006/25/EC, Annex II, Table 2.5; ICNIRP 2013: C_A = 10^(0.002 (lambda - 700)).
    return 10 ** (0.002 * (lam - 700.0))


def h_thermal_mid(lam: float, t: float, c_e: float) -> float:
    # ICNIRP 2013 / IEC 60825-1:2014, 700-1050 nm, 5 us to T2: 18 C_A C_E t^0.75 J/m^2.
    # from memory
    return 18.0 * c_a_formula(lam) * c_e * t**0.75


def test_reference_eye_is_the_one_of_the_references():
    # REFERENCES.md: f_eye = 17 mm [pub-usual]; transmission about 0.8 at 880-905 nm [mem].
    assert ex.HUMAN_EYE.focal_length_mm == F_EYE_MM
    assert ex.HUMAN_EYE.transmission == TAU
    assert ex.LIMITING_APERTURE_AREA_M2 == pytest.approx(A7_M2)


# --------------------------------------------------------------------------
# Correction factors
# --------------------------------------------------------------------------


@pytest.mark.parametrize("lam", [700.0, 880.0, 1050.0])
def test_c_a_follows_the_formula(lam):
    # Directive 2006/25/EC, Annex II, Table 2.5 (structure of ICNIRP 2013): 700-1050 nm.
    assert ex.c_a(lam) == pytest.approx(c_a_formula(lam), rel=1e-12)


def test_c_a_outside_the_formula_range():
    # Same table: C_A = 1 below 700 nm and 5 for 1050-1400 nm.
    assert ex.c_a(550.0) == 1.0
    assert ex.c_a(1064.0) == 5.0


def test_c_b_and_c_c():
    # Directive 2006/25/EC, Annex II, Table 2.5: C_B = 10^(0.02 (lambda - 450)) above 450 nm;
    # C_C = 1 for 700-1150 nm, 10^(0.018 (lambda - 1150)) for 1150-1200 nm.
    assert ex.c_b(420.0) == 1.0
    assert ex.c_b(500.0) == pytest.approx(10 ** (0.02 * 50))
    assert ex.c_c(880.0) == 1.0
    assert ex.c_c(1175.0) == pytest.approx(10 ** (0.018 * 25))
    # 1200-1400 nm: 8 + 10^(0.04 (lambda - 1250)) in the 2014 edition. # from memory
    assert ex.c_c(1300.0) == pytest.approx(8 + 10 ** (0.04 * 50))


def test_alpha_max_at_the_edges_of_its_regimes():
    # ICNIRP 2013 / IEC 60825-1:2014: 5 mrad below 625 us, 200 t^0.5 to 0.25 s, 100 beyond.
    # from memory (REFERENCES.md [mem])
    assert ex.alpha_max_mrad(1e-6) == 5.0
    assert ex.alpha_max_mrad(625e-6 * (1 - 1e-9)) == 5.0
    assert ex.alpha_max_mrad(625e-6) == pytest.approx(200 * math.sqrt(625e-6))
    assert ex.alpha_max_mrad(625e-6) == pytest.approx(5.0)
    assert ex.alpha_max_mrad(1e-2) == pytest.approx(200 * math.sqrt(1e-2))
    assert ex.alpha_max_mrad(0.25) == pytest.approx(100.0)
    assert ex.alpha_max_mrad(0.25 * (1 + 1e-9)) == 100.0
    assert ex.alpha_max_mrad(1000.0) == 100.0


def test_c_e_at_the_edges_of_its_regimes():
    # REFERENCES.md [pub]: C_E = 1 for alpha <= alpha_min, alpha/alpha_min up to alpha_max,
    # alpha^2/(alpha_min alpha_max) above; alpha_min = 1.5 mrad. alpha_max(t) from memory.
    amin = 1.5
    assert ex.c_e(0.0, 1.0) == 1.0
    assert ex.c_e(amin, 1.0) == 1.0
    assert ex.c_e(amin * 1.001, 1.0) == pytest.approx(1.001)
    # t = 1 s: alpha_max = 100 mrad
    assert ex.c_e(100.0, 1.0) == pytest.approx(100.0 / amin)
    assert ex.c_e(200.0, 1.0) == pytest.approx(200.0**2 / (amin * 100.0))
    # t = 100 us: alpha_max = 5 mrad (2014 edition, from memory)
    assert ex.c_e(5.0, 1e-4) == pytest.approx(5.0 / amin)
    assert ex.c_e(10.0, 1e-4) == pytest.approx(10.0**2 / (amin * 5.0))
    # continuous across alpha_max
    assert ex.c_e(5.0 * (1 + 1e-9), 1e-4) == pytest.approx(ex.c_e(5.0, 1e-4), rel=1e-6)


def test_t2_at_1_5_and_100_mrad():
    # REFERENCES.md [pub]: T2 = 10 * 10^((alpha - 1.5)/98.5) s between 1.5 and 100 mrad.
    assert ex.t2_s(1.5) == pytest.approx(10.0)
    assert ex.t2_s(100.0) == pytest.approx(100.0)
    assert ex.t2_s(0.5) == pytest.approx(10.0)
    assert ex.t2_s(300.0) == pytest.approx(100.0)
    assert ex.t2_s(50.0) == pytest.approx(10 * 10 ** ((50 - 1.5) / 98.5))


def test_c_p_reduction_and_floors():
    # ICNIRP 2013 / IEC 60825-1:2014: C_P = N^-0.25; no reduction up to 5 mrad, floors 0.4
    # (alpha <= alpha_max) and 0.2 (above). # from memory (REFERENCES.md [mem])
    assert ex.c_p(1000, 4.0, 0.01) == 1.0
    assert ex.c_p(16, 10.0, 0.01) == pytest.approx(16**-0.25)
    assert ex.c_p(1000, 10.0, 0.01) == pytest.approx(0.4)  # alpha_max(10 ms) = 20 mrad
    assert ex.c_p(100, 50.0, 0.01) == pytest.approx(100**-0.25)
    assert ex.c_p(1000, 50.0, 0.01) == pytest.approx(0.2)
    # pulses within T_i = 5 us count as one (2014 edition, from memory)
    assert ex.t_i_s(880.0) == 5e-6


# --------------------------------------------------------------------------
# MPE values
# --------------------------------------------------------------------------


def test_as_nzs_2211_sample_calculation_488_nm():
    # AS/NZS 2211.1:2004 sample calculation (REFERENCES.md [pub]): 488 nm (C_A = 1),
    # 0.25 s, small source: 1.8 (0.25)^0.75 mJ/cm^2 = 0.64 mJ/cm^2, i.e. 2.55 mW/cm^2.
    h_mj_per_cm2 = 1.8 * 0.25**0.75
    e_mw_per_cm2 = h_mj_per_cm2 / 0.25
    mpe = ex.corneal_mpe(488.0, 0.25, 1.0)
    # 1 mJ/cm^2 = 10 J/m^2; 1 mW/cm^2 = 10 W/m^2
    assert mpe.radiant_exposure_j_per_m2 / 10 == pytest.approx(h_mj_per_cm2, rel=1e-9)
    assert mpe.irradiance_w_per_m2 / 10 == pytest.approx(e_mw_per_cm2, rel=1e-9)
    assert round(mpe.radiant_exposure_j_per_m2 / 10, 2) == 0.64
    assert round(mpe.irradiance_w_per_m2 / 10, 2) == 2.55
    assert mpe.hazard == "thermal"
    assert mpe.edition == EDITION


def test_ns_plateau_and_long_exposure_values():
    # 2014 tables, 700-1050 nm: 2e-3 C_A C_E J/m^2 from 1e-11 s to 5 us; beyond T2 a constant
    # irradiance 18 C_A C_C C_E T2^-0.25 W/m^2. # from memory (REFERENCES.md [mem])
    assert ex.corneal_mpe(880, 1e-9, 1.0).radiant_exposure_j_per_m2 == pytest.approx(
        2e-3 * c_a_formula(880)
    )
    alpha = 20.0
    t2 = 10 * 10 ** ((alpha - 1.5) / 98.5)
    mpe = ex.corneal_mpe(880, 1000.0, alpha)
    assert mpe.irradiance_w_per_m2 == pytest.approx(
        18 * c_a_formula(880) * (alpha / 1.5) * t2**-0.25
    )


def test_photochemical_limit_binds_for_long_blue_exposures():
    # 400-600 nm, t > 10 s: 1 C_B W/m^2 beyond 100 s, measured over gamma_ph = 1.1 t^0.5 mrad
    # (100 s - 1e4 s); thermal beyond T2 for a small source 10 W/m^2. # from memory
    small = ex.corneal_mpe(440.0, 1000.0, 1.0)
    assert small.hazard == "photochemical"
    assert small.irradiance_w_per_m2 == pytest.approx(1.0)
    alpha = 200.0
    gamma = 1.1 * math.sqrt(1000.0)
    big = ex.corneal_mpe(440.0, 1000.0, alpha)
    assert big.gamma_ph_mrad == pytest.approx(gamma)
    # a uniform source larger than gamma_ph counts only with the part inside gamma_ph
    assert big.irradiance_w_per_m2 == pytest.approx((alpha / gamma) ** 2)
    assert big.hazard == "photochemical"
    # no photochemical limit at 880 nm
    assert ex.corneal_mpe(880.0, 1000.0, 1.0).photochemical_j_per_m2 is None


def _h(lam, t, alpha):
    return ex.corneal_mpe(lam, t, alpha).radiant_exposure_j_per_m2


@pytest.mark.parametrize(
    ("lam", "t_break", "alpha"),
    [
        (880.0, 5e-6, 1.5),  # ns plateau -> t^0.75, 400-1050 nm  # from memory
        (550.0, 5e-6, 3.0),
        (1200.0, 13e-6, 1.5),  # 1050-1400 nm breakpoint 13 us  # from memory
        (880.0, 625e-6, 20.0),  # alpha_max leaves 5 mrad  # from memory
        (880.0, 0.25, 150.0),  # alpha_max reaches 100 mrad  # from memory
        (880.0, 10.0, 1.5),  # T2 for a small source
        (880.0, 10 * 10 ** ((20.0 - 1.5) / 98.5), 20.0),  # T2(20 mrad)
        (880.0, 100.0, 100.0),  # T2(100 mrad)
        (1300.0, 100.0, 120.0),
        (420.0, 10.0, 1.5),  # photochemical limit starts (small source)  # from memory
        (420.0, 100.0, 5.0),  # photochemical: 100 C_B J/m^2 -> 1 C_B W/m^2  # from memory
        (420.0, 1e4, 200.0),  # gamma_ph reaches 110 mrad  # from memory
    ],
)
def test_mpe_is_continuous_at_each_time_breakpoint(lam, t_break, alpha):
    # The tables are built to join at their breakpoints (ICNIRP 2013; IEC 60825-1:2014),
    # within the rounding of the table constants: within 5 %.
    below = _h(lam, t_break * (1 - 1e-9), alpha)
    above = _h(lam, t_break * (1 + 1e-9), alpha)
    assert abs(above - below) / max(above, below) <= 0.05


def test_sub_ns_row_is_a_documented_step():
    # The 2014 tables put 1e-3 C_A C_E J/m^2 below 1e-11 s and 2e-3 C_A C_E above. # from memory
    below = _h(880.0, 1e-11 * (1 - 1e-9), 1.5)
    above = _h(880.0, 1e-11 * (1 + 1e-9), 1.5)
    assert below == pytest.approx(1e-3 * c_a_formula(880))
    assert above / below == pytest.approx(2.0)


def test_retinal_conversion_helpers():
    # REFERENCES.md: d = alpha f_eye, P = E A_7mm, E_r = tau P / (pi d^2 / 4).
    e = 10.0  # W/m^2 at the cornea
    alpha = 10.0
    d_mm = alpha * F_EYE_MM * 1e-3
    expected = TAU * e * A7_M2 * 1e3 / (math.pi * d_mm**2 / 4)
    assert ex.retinal_image_diameter_um(alpha) == pytest.approx(alpha * F_EYE_MM)
    assert ex.power_into_eye_mw(e) == pytest.approx(e * A7_M2 * 1e3)
    assert ex.retinal_irradiance_mw_per_mm2(e, alpha) == pytest.approx(expected)
    # below alpha_min the image is taken as alpha_min
    assert ex.retinal_image_diameter_um(0.1) == pytest.approx(1.5 * F_EYE_MM)


# --------------------------------------------------------------------------
# Pulse trains
# --------------------------------------------------------------------------


def _train_30hz():
    # 10 ms pulses at 30 Hz for 10 s (REFERENCES.md: 8 mW/mm^2 at 30 % duty, Wang 2022)
    return ex.periodic_pulses(10.0, frequency_hz=30.0, duration_ms=10_000.0)


def _hand_rule2(power_mw, alpha, c_e_window):
    # Rule 2 [pub]: every group of n consecutive pulses, T_n = (n-1)/30 s + 10 ms.
    best = 0.0
    for n in range(1, 301):
        t = (n - 1) / 30.0 + 0.01
        ratio = n * power_mw * 0.01 / retinal_energy_limit_mj(h_thermal_mid(880, t, c_e_window))
        best = max(best, ratio)
    return best


def test_pulse_rules_small_source_average_power_binds():
    pulses = _train_30hz()
    assert len(pulses) == 300
    p = 1.0  # mW in the acceptance disc
    res = ex.evaluate_train(pulses, 880.0, 1.5, p)
    # Rule 1 [pub]: each pulse against 18 C_A t^0.75 (C_E = 1 at alpha_min). # from memory
    r1 = p * 0.01 / retinal_energy_limit_mj(h_thermal_mid(880, 0.01, 1.0))
    r2 = _hand_rule2(p, 1.5, 1.0)
    assert res.ratio("single_pulse") == pytest.approx(r1, rel=1e-9)
    assert res.ratio("average_power") == pytest.approx(r2, rel=1e-9)
    # Rule 3: no reduction up to alpha = 5 mrad. # from memory
    assert res.ratio("repeated_pulse") == pytest.approx(r1, rel=1e-9)
    assert res.binding_rule == "average_power"
    assert res.rules["average_power"].n_pulses == 300  # the whole train is the worst group
    assert res.margin == pytest.approx(1 / r2)


def test_pulse_rules_extended_source_repeated_pulse_binds():
    pulses = _train_30hz()
    p = 1.0
    alpha = 10.0
    res = ex.evaluate_train(pulses, 880.0, alpha, p)
    # alpha_max(10 ms) = 20 mrad and alpha_max(10 s) = 100 mrad: C_E = alpha/1.5 for both.
    ce = alpha / 1.5
    r1 = p * 0.01 / retinal_energy_limit_mj(h_thermal_mid(880, 0.01, ce))
    # C_P = max(300^-0.25, 0.4) = 0.4 for 5 < alpha <= alpha_max. # from memory
    cp = max(300**-0.25, 0.4)
    assert cp == 0.4
    r2 = _hand_rule2(p, alpha, ce)
    assert res.ratio("single_pulse") == pytest.approx(r1, rel=1e-9)
    assert res.ratio("repeated_pulse") == pytest.approx(r1 / cp, rel=1e-9)
    assert res.ratio("average_power") == pytest.approx(r2, rel=1e-9)
    assert res.rules["repeated_pulse"].n_pulses == 300
    assert res.binding_rule == "repeated_pulse"


def test_pulse_rules_sparse_pulses_single_pulse_binds():
    # Source: REFERENCES.md [pub], repeated pulses, rules 1 and 2; limits from memory.
    # Two 10 ms pulses 5 s apart: rule 2 gives 2 x 10 ms of energy against the 5.01 s limit.
    pulses = [ex.Pulse(0.0, 10.0), ex.Pulse(5000.0, 10.0)]
    res = ex.evaluate_train(pulses, 880.0, 1.5, 2.0)
    r1 = 2.0 * 0.01 / retinal_energy_limit_mj(h_thermal_mid(880, 0.01, 1.0))
    r2 = 2 * 2.0 * 0.01 / retinal_energy_limit_mj(h_thermal_mid(880, 5.01, 1.0))
    assert res.ratio("single_pulse") == pytest.approx(r1, rel=1e-9)
    assert res.ratio("average_power") == pytest.approx(r1, rel=1e-9)  # a single pulse
    assert r2 < r1
    assert res.binding_rule == "single_pulse"


def test_pulses_of_different_widths_and_pauses():
    # Source: REFERENCES.md [pub], rule 2 (average over any group of pulses); from memory.
    # A 1 s pulse train at 40 Hz (5 ms), a pause, then 20 ms pulses at 10 Hz at half power:
    # the scale multiplies the power; rule 2 includes the whole timeline.
    first = ex.periodic_pulses(5.0, frequency_hz=40.0, count=40)
    second = ex.periodic_pulses(20.0, period_ms=100.0, count=10, start_ms=3000.0, scale=0.5)
    res = ex.evaluate_train(first + second, 880.0, 1.5, 1.0)
    total_energy = 40 * 0.005 + 10 * 0.5 * 0.02  # mJ at 1 mW
    t_all = 3.0 + 0.9 + 0.02
    whole = total_energy / retinal_energy_limit_mj(h_thermal_mid(880, t_all, 1.0))
    assert res.ratio("average_power") >= whole * (1 - 1e-12)
    assert res.n_pulses == 50


def test_long_trains_bound_rule_2_from_above(monkeypatch):
    # The sampled windows of long trains may only err high, and by little (2 % steps).
    rng = np.random.default_rng(7)
    starts = np.cumsum(rng.uniform(5.0, 60.0, 2300))
    widths = rng.uniform(0.5, 4.0, 2300)
    pulses = [
        ex.Pulse(float(s), float(w), float(k))
        for s, w, k in zip(starts, widths, rng.uniform(0.2, 1.0, 2300), strict=True)
    ]
    sampled = ex.evaluate_train(pulses, 880.0, 1.5, 1.0).ratio("average_power")
    monkeypatch.setattr(ex, "_EXACT_WINDOW_MAX", 10**6)
    exact = ex.evaluate_train(pulses, 880.0, 1.5, 1.0).ratio("average_power")
    assert exact * (1 - 1e-12) <= sampled <= exact * 1.03


def test_pulses_within_t_i_count_as_one():
    # 2014 edition: pulses within T_i = 5 us are one pulse for rules 1 and 3. # from memory
    burst = [ex.Pulse(k * 1e-3, 1e-4) for k in range(4)]  # 4 x 100 ns within 4 us
    res = ex.evaluate_train(burst, 880.0, 1.5, 1.0)
    energy = 4 * 1.0 * 1e-7  # mJ
    # the group is compared with the MPE for T_i: the row that starts at 5 us, 18 C_A t^0.75
    limit = retinal_energy_limit_mj(h_thermal_mid(880, 5e-6, 1.0))
    assert res.ratio("single_pulse") == pytest.approx(energy / limit, rel=1e-9)


def test_photochemical_rule_for_a_long_blue_pulse():
    # 450 nm (C_B = 1), 200 s, small source: photochemical 1 C_B W/m^2 beyond 100 s against
    # thermal 10 W/m^2 beyond T2 = 10 s. # from memory
    p = 0.01  # mW
    res = ex.evaluate_train([ex.Pulse(0.0, 200_000.0)], 450.0, 1.5, p)
    expected = p * 200.0 / retinal_energy_limit_mj(1.0 * 200.0)
    assert res.worst.hazard == "photochemical"
    assert res.worst_ratio == pytest.approx(expected, rel=1e-9)
    assert res.binding_rule == "single_pulse"


# --------------------------------------------------------------------------
# Disc integration (varying acceptance angle)
# --------------------------------------------------------------------------


def _raster_disc(grid: RetinalGrid, radius_um: float, sub: int = 8) -> np.ndarray:
    """Area fraction of each sample inside a centred disc, by supersampling (test's own)."""
    x, y = grid.coords_um()
    off = (np.arange(sub) + 0.5) / sub - 0.5
    acc = np.zeros(grid.shape)
    for oy in off:
        for ox in off:
            acc += (
                (x + ox * grid.pitch_x_um) ** 2 + (y + oy * grid.pitch_y_um) ** 2
            ) <= radius_um**2
    return acc / sub**2


def test_disc_power_of_a_uniform_disc_matches_the_analytic_value():
    # A uniform disc of irradiance E0 and radius R: a disc of radius r < R inside it holds
    # E0 pi r^2; a disc larger than the source holds all of it, E0 pi R^2.
    grid = RetinalGrid((256, 256), 5.0, 5.0)
    e0, radius = 2.0, 200.0
    irr = e0 * _raster_disc(grid, radius)
    small = ex.disc_power_map(irr, grid, 100.0)
    assert small.max() == pytest.approx(e0 * math.pi * (0.05**2), rel=5e-3)
    big = ex.disc_power_map(irr, grid, 600.0)
    assert big.max() == pytest.approx(e0 * math.pi * (0.2**2), rel=5e-3)
    # anti-aliased: an acceptance disc of 3.3 samples still integrates exactly
    tiny = ex.disc_power_map(np.full(grid.shape, e0), grid, 16.5)
    assert tiny[128, 128] == pytest.approx(e0 * math.pi * (16.5e-3 / 2) ** 2, rel=5e-3)


def test_evaluate_map_of_a_uniform_disc_against_the_hand_limit():
    # Source of subtense alpha_s = 2R / f: ratio = E0 / E_r,lim with
    # E_r,lim = tau H A_7mm / (pi (alpha_s f)^2 / 4), H = 18 C_A C_E t^0.75, C_E = alpha_s/1.5.
    grid = RetinalGrid((256, 256), 5.0, 5.0)
    e0, radius, t = 2.0, 200.0, 1.0
    alpha_s = 2 * radius / F_EYE_MM
    irr = e0 * _raster_disc(grid, radius)
    res = ex.evaluate_map(irr, grid, 880.0, t, alphas_mrad=[alpha_s])
    d_mm = alpha_s * F_EYE_MM * 1e-3
    e_lim = retinal_energy_limit_mj(h_thermal_mid(880, t, alpha_s / 1.5)) / t
    e_lim /= math.pi * d_mm**2 / 4
    assert res.worst_ratio == pytest.approx(e0 / e_lim, rel=1e-2)
    assert res.worst.alpha_mrad == pytest.approx(alpha_s)
    assert math.hypot(res.worst.x_um, res.worst.y_um) <= 10.0


def test_small_hot_spot_is_found_where_it_is():
    # Source: REFERENCES.md, extended-source evaluation: a point source is judged at
    # alpha_min = 1.5 mrad with C_E = 1 [pub]; the 10 ms limit value is from memory.
    grid = RetinalGrid((256, 256), 2.0, 2.0)
    irr = np.full(grid.shape, 0.01, dtype=np.float32)
    p_spot = 0.5  # mW in one sample
    row, col = 100, 160
    irr[row, col] += p_spot / grid.sample_area_mm2
    power, x, y = ex.max_disc_power(irr, grid, 1.5)
    d_mm = 1.5 * F_EYE_MM * 1e-3
    assert power == pytest.approx(p_spot + 0.01 * math.pi * d_mm**2 / 4, rel=2e-3)
    assert (x, y) == pytest.approx(grid.point_of(row, col))
    res = ex.evaluate_map(irr, grid, 880.0, 0.01)
    assert res.worst.alpha_mrad == pytest.approx(1.5)
    assert (res.worst.x_um, res.worst.y_um) == pytest.approx(grid.point_of(row, col))
    # a point source against the alpha_min limit for 10 ms (C_E = 1):
    expected = power * 0.01 / retinal_energy_limit_mj(h_thermal_mid(880, 0.01, 1.0))
    assert res.worst_ratio == pytest.approx(expected, rel=2e-3)


def test_disc_smaller_than_a_sample_is_a_point():
    # Documented: the sample's irradiance times the disc area.
    grid = RetinalGrid((64, 64), 50.0, 50.0)
    irr = np.zeros(grid.shape, dtype=np.float32)
    irr[10, 20] = 40.0
    power, x, y = ex.max_disc_power(irr, grid, 1.5)  # 25.5 um < 50 um
    assert power == pytest.approx(40.0 * math.pi * (25.5e-3) ** 2 / 4, rel=1e-5)
    assert (x, y) == pytest.approx(grid.point_of(10, 20))


# --------------------------------------------------------------------------
# Sequences
# --------------------------------------------------------------------------


def _full_field_limit_mw_per_mm2(t: float) -> float:
    # Full field on a 2.56 mm grid: the worst acceptance angle is alpha_max = 100 mrad
    # (t > 0.25 s, from memory), C_E = 100/1.5, T2(100 mrad) = 100 s > t, so
    # H = 18 C_A C_E t^0.75; retinal irradiance tau H A_7mm / t / (pi (0.1 x 17 mm)^2 / 4).
    d_mm = 100.0 * F_EYE_MM * 1e-3
    return retinal_energy_limit_mj(h_thermal_mid(880, t, 100.0 / 1.5)) / t / (math.pi * d_mm**2 / 4)


def test_full_field_above_the_limit():
    # Source: the task's check case (full field at 880 nm, 50 mW/mm^2 for 10 s); the limit
    # is derived in _full_field_limit_mw_per_mm2 from the formulas (from memory).
    grid = RetinalGrid((256, 256), 10.0, 10.0)
    res = ex.evaluate_map(np.full(grid.shape, 50.0), grid, 880.0, 10.0)
    assert res.verdict == "above"
    assert res.verdict_standard == "above"
    assert res.worst_ratio == pytest.approx(50.0 / _full_field_limit_mw_per_mm2(10.0), rel=1e-2)
    assert res.worst_ratio > 1
    # one 10 s exposure: the three rules coincide and the first, single pulse, is named
    assert res.binding_rule == "single_pulse"
    assert res.worst.alpha_mrad == pytest.approx(100.0)
    assert res.worst.hazard == "thermal"
    assert CAUTIONS in res.summary()
    assert res.edition == EDITION


def test_full_field_within_the_limit_with_its_margin():
    # Source: as above, at 0.1 mW/mm^2; the margin is the hand limit over 0.1 (from memory).
    grid = RetinalGrid((256, 256), 10.0, 10.0)
    irr = np.full(grid.shape, 0.1)
    res = ex.assess_sequence([ex.Frame(irr, (ex.Pulse(0.0, 10_000.0),))], grid, 880.0)
    assert res.verdict == "within"
    assert res.margin == pytest.approx(_full_field_limit_mw_per_mm2(10.0) / 0.1, rel=1e-2)
    assert res.max_dose_mj_per_mm2 == pytest.approx(0.1 * 10.0, rel=1e-6)
    assert res.peak_irradiance_mw_per_mm2 == pytest.approx(0.1, rel=1e-6)


def test_full_field_blue_light_is_photochemical_over_gamma_ph():
    # 440 nm (C_B = 1), 1000 s: the photochemical limit 1 C_B W/m^2 applies to the power in
    # gamma_ph = 1.1 t^0.5 mrad (100 s - 1e4 s). # from memory
    grid = RetinalGrid((256, 256), 5.0, 5.0)
    e_r = 0.01
    res = ex.evaluate_map(np.full(grid.shape, e_r), grid, 440.0, 1000.0)
    gamma = 1.1 * math.sqrt(1000.0)
    d_mm = gamma * F_EYE_MM * 1e-3
    expected = e_r * math.pi * d_mm**2 / 4 * 1000.0 / retinal_energy_limit_mj(1.0 * 1000.0)
    assert res.worst.hazard == "photochemical"
    assert res.worst.alpha_mrad == pytest.approx(gamma)
    assert res.worst_ratio == pytest.approx(expected, rel=1e-2)


def test_two_frames_lighting_different_places():
    # Source: REFERENCES.md [pub], rules evaluated per location; limits from memory.
    # Frames A and B alternate (each 10 ms at 30 Hz, 2 s); they light discs 600 um apart.
    grid = RetinalGrid((128, 128), 10.0, 10.0)
    x, y = grid.coords_um()
    a = (((x + 300) ** 2 + y**2) < 150**2) * 4.0
    b = (((x - 300) ** 2 + y**2) < 150**2) * 4.0
    pa = ex.periodic_pulses(10.0, frequency_hz=30.0, duration_ms=2000.0)
    pb = ex.periodic_pulses(10.0, frequency_hz=30.0, duration_ms=2000.0, start_ms=15.0)
    res = ex.assess_sequence([ex.Frame(a, pa), (b, pb)], grid, 880.0, subject="rat")
    # each place is lit by its own frame only: the dose is 60 pulses x 10 ms x 4 mW/mm^2
    assert res.max_dose_mj_per_mm2 == pytest.approx(60 * 0.01 * 4.0, rel=1e-6)
    assert res.rules["repeated_pulse"].n_pulses == 60  # not 120
    assert "rat" in res.basis and "human" in res.basis
    assert res.rules["average_power"].n_pulses == 60


def test_protocol_cap_can_only_add_restrictions():
    # common practice: a protocol cap adds a restriction beside the standard; the time
    # average is computed by hand from the pulse train.
    grid = RetinalGrid((128, 128), 10.0, 10.0)
    irr = np.full(grid.shape, 8.0)
    pulses = ex.periodic_pulses(10.0, frequency_hz=30.0, duration_ms=1000.0)
    strict = ex.ProtocolCap(peak_irradiance_mw_per_mm2=5.0, name="ethics")
    res = ex.assess_sequence([ex.Frame(irr, pulses)], grid, 880.0, protocol=strict)
    assert res.verdict_standard == "within"
    assert res.protocol.peak_ratio == pytest.approx(8.0 / 5.0)
    assert res.verdict == "above"
    # a loose cap never relaxes the standard
    loose = ex.ProtocolCap(1e6, 1e6)
    hot = ex.assess_sequence(
        [ex.Frame(np.full(grid.shape, 500.0), pulses)], grid, 880.0, protocol=loose
    )
    assert hot.protocol.verdict == "within"
    assert hot.verdict_standard == "above" and hot.verdict == "above"
    # time average over the sequence: 30 pulses x 10 ms of 8 mW/mm^2 over (29/30 s + 10 ms)
    mean = 30 * 0.01 * 8.0 / (29 / 30 + 0.01)
    assert res.protocol.mean_irradiance_mw_per_mm2 == pytest.approx(mean, rel=1e-6)


# --------------------------------------------------------------------------
# Power planning
# --------------------------------------------------------------------------


def _hologram_like(grid: RetinalGrid) -> tuple[np.ndarray, np.ndarray]:
    """ON squares at 0.5 mW/mm^2 per mW, plus a zero-order hot spot (at 1 mW laser power)."""
    x, y = grid.coords_um()
    on = (
        ((np.abs(x) % 200) < 100)
        & ((np.abs(y) % 200) < 100)
        & (np.abs(x) < 500)
        & (np.abs(y) < 500)
    )
    irr = np.where(on, 0.5, 0.0).astype(np.float32)
    r0, c0 = grid.centre_index
    irr[r0, c0] += 0.02 / grid.sample_area_mm2  # 0.02 mW zero order
    return irr, on


def test_power_planning_round_trips():
    # Source: linearity of irradiance and exposure in laser power (common practice).
    grid = RetinalGrid((128, 128), 10.0, 10.0)
    irr, on = _hologram_like(grid)
    pulses = ex.periodic_pulses(10.0, frequency_hz=30.0, duration_ms=1000.0)
    at_1mw = ex.assess_sequence([ex.Frame(irr, pulses)], grid, 880.0)
    per_mw = ex.PerMilliwatt.from_assessment(at_1mw, 1.0, float(irr[on].mean()))
    target = 3.0
    plan = ex.plan_power(target, per_mw)
    # plan for X mW/mm^2, then X = per-mW x power
    scaled = irr * np.float32(plan.laser_power_mw)
    assert float(scaled[on].mean()) == pytest.approx(target, rel=2e-2)
    again = ex.assess_sequence([ex.Frame(scaled, pulses)], grid, 880.0)
    assert again.worst_ratio == pytest.approx(plan.worst_ratio, rel=2e-2)
    # the largest power within every rule puts the worst ratio at 1
    at_max = ex.assess_sequence(
        [ex.Frame(irr * np.float32(plan.max_laser_power_mw), pulses)], grid, 880.0
    )
    assert at_max.worst_ratio == pytest.approx(1.0, rel=2e-2)
    assert CAUTIONS in plan.summary()


def test_hologram_and_mask_side_by_side():
    # common practice: power planning is linear; expected values worked by hand.
    holo = ex.PerMilliwatt(0.5, 0.01, label="hologram")
    mask = ex.PerMilliwatt(0.05, 0.004, label="amplitude mask")
    cmp_ = ex.compare_power(2.0, holo, mask, laser_max_mw=100.0)
    assert cmp_.hologram.laser_power_mw == pytest.approx(2.0 / 0.5)
    assert cmp_.baseline.laser_power_mw == pytest.approx(2.0 / 0.05)
    assert cmp_.power_ratio == pytest.approx(10.0)
    assert cmp_.hologram.max_laser_power_mw == pytest.approx(100.0)
    assert cmp_.baseline.max_irradiance_mw_per_mm2 == pytest.approx(0.05 / 0.004)
    assert cmp_.safe_irradiance_ratio == pytest.approx((0.5 / 0.01) / (0.05 / 0.004))
    assert cmp_.baseline.verdict == "within"
    assert CAUTIONS in cmp_.summary()


# --------------------------------------------------------------------------
# Invalid input
# --------------------------------------------------------------------------


@pytest.mark.parametrize("lam", [350.0, 1500.0])
def test_wavelength_outside_the_retinal_region(lam):
    with pytest.raises(ConfigError) as err:
        ex.corneal_mpe(lam, 1.0, 1.5)
    assert err.value.field == "wavelength_nm"
    assert "400" in err.value.allowed and "1400" in err.value.allowed


def test_negative_duration():
    with pytest.raises(ConfigError) as err:
        ex.corneal_mpe(880.0, -1.0, 1.5)
    assert err.value.field == "duration_s"
    assert "1e-13" in err.value.allowed
    with pytest.raises(ConfigError) as err:
        ex.evaluate_train([(0.0, -5.0)], 880.0, 1.5, 1.0)
    assert err.value.field == "pulses[0].duration_ms"
    assert "> 0" in err.value.allowed


def test_pulse_longer_than_its_period():
    with pytest.raises(ConfigError) as err:
        ex.periodic_pulses(40.0, frequency_hz=30.0, count=10)
    assert err.value.field == "pulse_ms"
    assert "period" in err.value.allowed and "33.3" in err.value.allowed


def test_power_of_zero():
    with pytest.raises(ConfigError) as err:
        ex.evaluate_train(_train_30hz(), 880.0, 1.5, 0.0)
    assert err.value.field == "peak_retinal_power_mw"
    assert "> 0" in err.value.allowed
    with pytest.raises(ConfigError) as err:
        ex.plan_power(0.0, ex.PerMilliwatt(0.5, 0.01))
    assert err.value.field == "target_irradiance_mw_per_mm2"
    with pytest.raises(ConfigError) as err:
        ex.PerMilliwatt(0.0, 0.01)
    assert "irradiance" in err.value.field and "> 0" in err.value.allowed


def test_map_shape_and_sign_are_checked():
    grid = RetinalGrid((32, 32), 5.0, 5.0)
    with pytest.raises(ConfigError) as err:
        ex.evaluate_map(np.ones((16, 16)), grid, 880.0, 1.0)
    assert err.value.field == "frames[0].irradiance_mw_per_mm2"
    with pytest.raises(ConfigError):
        ex.evaluate_map(-np.ones(grid.shape), grid, 880.0, 1.0)


# --------------------------------------------------------------------------
# Cautions
# --------------------------------------------------------------------------


def test_every_summary_carries_the_caution_and_the_edition():
    assert "not a safety approval" in CAUTIONS
    assert "laser-safety officer" in CAUTIONS and "protocol" in CAUTIONS
    assert "IEC 60825-1:2014" in CAUTIONS and "ICNIRP 2013" in CAUTIONS
    assert "\n" not in CAUTION_SHORT and "not a safety approval" in CAUTION_SHORT
    mpe = ex.corneal_mpe(880.0, 0.01, 5.0)
    train = ex.evaluate_train(_train_30hz(), 880.0, 5.0, 1.0)
    for obj in (mpe, train):
        assert obj.edition == EDITION
        assert CAUTIONS in obj.summary()


# --------------------------------------------------------------------------
# Long sequences: lazy frames, shared maps, bounded memory
# --------------------------------------------------------------------------


def _ref_peak_location(values):
    # The location rule of assess_sequence, written directly on full index arrays.
    flat = int(np.argmax(values))
    top = float(values.flat[flat])
    if top <= 0:
        return divmod(flat, values.shape[1])
    rows, cols = np.nonzero(values >= top * (1 - 1e-5))
    if len(rows) == 1:
        return int(rows[0]), int(cols[0])
    k = int(np.argmin((rows - rows.mean()) ** 2 + (cols - cols.mean()) ** 2))
    return int(rows[k]), int(cols[k])


def _ref_disc_maps(irr, grid, diameters_um):
    # Area-weighted disc integration by zero-padded FFT convolution, padded for the
    # largest disc, one map at a time; a disc within one sample is a point.
    def half(d):
        r = d / 2.0
        return (
            min(int(math.ceil(r / grid.pitch_y_um + 0.5)), grid.rows - 1),
            min(int(math.ceil(r / grid.pitch_x_um + 0.5)), grid.cols - 1),
        )

    hy, hx = half(max(diameters_um))
    shape = (
        sfft.next_fast_len(grid.rows + 2 * hy, real=True),
        sfft.next_fast_len(grid.cols + 2 * hx, real=True),
    )
    spectrum = sfft.rfft2(np.ascontiguousarray(irr, dtype=np.float32), s=shape, workers=-1)
    out = []
    for d in diameters_um:
        if d <= min(grid.pitch_x_um, grid.pitch_y_um):
            out.append(irr * np.float32(math.pi * (d * 1e-3) ** 2 / 4.0))
            continue
        ky, kx = half(d)
        kernel = ex._disc_kernel(d, grid.pitch_x_um, grid.pitch_y_um, ky, kx)
        full = sfft.irfft2(spectrum * sfft.rfft2(kernel, s=shape, workers=-1), s=shape, workers=-1)
        m = np.array(full[ky : ky + grid.rows, kx : kx + grid.cols])
        m[m < 1e-6 * float(m.max())] = 0.0
        out.append(m)
    return out


def _ref_disc_sum(irr, grid, d, r, c):
    # The area-weighted disc kernel times the map around (r, c), summed in float64;
    # light outside the map is zero. A disc within one sample is a point.
    if d <= min(grid.pitch_x_um, grid.pitch_y_um):
        return float(irr[r, c]) * math.pi * (d * 1e-3) ** 2 / 4.0
    rr = d / 2.0
    ky = min(int(math.ceil(rr / grid.pitch_y_um + 0.5)), grid.rows - 1)
    kx = min(int(math.ceil(rr / grid.pitch_x_um + 0.5)), grid.cols - 1)
    kernel = ex._disc_kernel(d, grid.pitch_x_um, grid.pitch_y_um, ky, kx).astype(np.float64)
    padded = np.zeros((grid.rows + 2 * ky, grid.cols + 2 * kx))
    padded[ky : ky + grid.rows, kx : kx + grid.cols] = irr
    return float(np.sum(kernel * padded[r : r + 2 * ky + 1, c : c + 2 * kx + 1]))


def _reference_assess(maps, pulses, grid, lam, alphas_mrad=None):
    """Every map and every disc-power map held at once, evaluated frame by frame.

    The straightforward form of the varying-angle evaluation of assess_sequence:
    the locations are each frame's disc-power maximum, the disc-energy maximum (the
    disc-power maximum of the dose map, by linearity) and the samples of largest
    dose and peak irradiance; the disc powers there are direct sums of the kernel
    over the map. # common practice
    """
    eye = ex.HUMAN_EYE
    all_p = [p for ps in pulses for p in ps]
    frame_idx = np.array([k for k, ps in enumerate(pulses) for _ in ps], dtype=np.int64)
    starts, durs = ex._timeline_arrays(all_p, "pulses")
    scales = np.array([p.scale for p in all_p])
    total = float(np.max(starts + durs) - starts.min())
    n_f = len(maps)
    weight = np.bincount(frame_idx, weights=scales * durs, minlength=n_f)
    top = np.zeros(n_f)
    np.maximum.at(top, frame_idx, scales)
    lit = [k for k in range(n_f) if top[k] > 0 and np.any(maps[k])]
    dose = sum((maps[k] * weight[k] for k in range(n_f)), np.zeros(grid.shape))
    overlap = ex._frames_overlap(starts, durs, frame_idx)
    peak = np.zeros(grid.shape)
    for k in range(n_f):
        peak = peak + maps[k] * top[k] if overlap else np.maximum(peak, maps[k] * top[k])
    if alphas_mrad is None:
        alphas = ex.default_acceptance_angles_mrad(
            np.unique(durs), total_duration_s=total, wavelength_nm=lam
        )
    else:
        alphas = tuple(sorted(set(alphas_mrad)))
    photo = ex._photochemical_applies(lam, total)
    gamma = ex._gamma_ph(total) if photo else None
    angles = sorted(set(alphas) | ({gamma} if photo else set()))
    diams = [ex.retinal_image_diameter_um(a, eye) for a in angles]
    disc = {k: _ref_disc_maps(maps[k], grid, diams) for k in lit}
    energy_maps = _ref_disc_maps(dose.astype(np.float32), grid, diams)
    fixed = {_ref_peak_location(dose), _ref_peak_location(peak)}
    rules = {r: ex._empty_rule(r, alphas[0]) for r in ex.RULES}
    rows = []
    for j, a in enumerate(angles):
        locs = set(fixed)
        max_power = 0.0
        for k in lit:
            r, c = _ref_peak_location(disc[k][j])
            locs.add((r, c))
            max_power = max(max_power, _ref_disc_sum(maps[k], grid, diams[j], r, c) * top[k])
        if lit:
            locs.add(_ref_peak_location(energy_maps[j]))
        hazards = (["thermal"] if a in alphas else []) + (["photochemical"] if a == gamma else [])
        at = {r: ex._empty_rule(r, a) for r in ex.RULES}
        for r, c in sorted(locs):
            fp = np.zeros(n_f)
            for k in lit:
                fp[k] = _ref_disc_sum(maps[k], grid, diams[j], r, c)
            x, y = grid.point_of(r, c)
            for hz in hazards:
                res = ex._timeline_rules(starts, durs, fp[frame_idx] * scales, lam, a, eye, hz)
                at = ex._merge_rules(
                    at, {n: replace(res[n], x_um=float(x), y_um=float(y)) for n in ex.RULES}
                )
        rules = ex._merge_rules(rules, at)
        b = ex._binding(at)
        rows.append((a, diams[j], float(max_power), b.ratio, b.rule, b.hazard))
    return {"dose": dose, "peak": peak, "rules": rules, "angles": rows}


def _spots(grid: RetinalGrid, n: int, seed: int) -> list[np.ndarray]:
    """Demo maps: a bright disc each at its own place on a dim random floor."""
    rng = np.random.default_rng(seed)
    x, y = grid.coords_um()
    out = []
    for _ in range(n):
        cx, cy = rng.uniform(-0.3, 0.3, 2) * grid.cols * grid.pitch_x_um
        r = rng.uniform(0.05, 0.12) * grid.cols * grid.pitch_x_um
        m = np.where((x - cx) ** 2 + (y - cy) ** 2 < r * r, rng.uniform(1.0, 5.0), 0.0)
        out.append((m + rng.uniform(0.0, 0.05, grid.shape)).astype(np.float32))
    return out


def _not_read() -> np.ndarray:
    raise AssertionError("a frame sharing a key must not be read")


class _Counted:
    """A lazy map that counts how often it is read (a fresh copy each time)."""

    def __init__(self, arr: np.ndarray):
        self.arr, self.calls = arr, 0

    def __call__(self) -> np.ndarray:
        self.calls += 1
        return self.arr.copy()


def _train(start_ms: float, n: int = 5, scale: float = 1.0) -> tuple:
    return tuple(ex.Pulse(start_ms + 40.0 * i, 10.0, scale) for i in range(n))


def _mixed_sequence(grid: RetinalGrid, long: bool):
    """Eager, lazy, shared, keyed, dark and unlit frames; their maps and pulses."""
    a, b, c, d = _spots(grid, 4, seed=7)
    base = d * np.float32(0.5)  # a base map shared by two lazy frames
    zero = np.zeros(grid.shape, np.float32)
    lazy_b, lazy_c = _Counted(b), _Counted(c)
    if long:  # over 10 s: the photochemical limits apply at 450 nm
        p = [tuple(ex.Pulse(3000.0 * i + 500.0 * k, 400.0) for i in range(4)) for k in range(6)]
    else:
        p = [_train(0), _train(10), _train(20), _train(30), _train(15, 2, 0.5), _train(5)]
    frames = [
        ex.Frame(a, p[0], "a"),
        ex.Frame(lazy_b, p[1], "b, lazy"),
        (a, p[2]),  # the same array again
        ex.Frame(lazy_c, p[3], "c, keyed", key="c"),
        ex.Frame(_not_read, p[4], "c again", key="c"),
        ex.Frame(lambda: base, p[5], "shared base"),
        ex.Frame(lambda: base, _train(25, 3), "shared base again"),
        ex.Frame(zero, _train(35), "dark"),
        ex.Frame(lambda: a * np.float32(2.0), _train(8, 2, 0.0), "unlit"),
    ]
    maps = [a, b, a, c, c, base, base, zero, a * np.float32(2.0)]
    pulses = [f.pulses if isinstance(f, ex.Frame) else f[1] for f in frames]
    return frames, maps, pulses, (lazy_b, lazy_c)


@pytest.mark.parametrize(
    ("lam", "long", "pitch"),
    [(880.0, False, (12.0, 14.0)), (880.0, False, (30.0, 30.0)), (450.0, True, (12.0, 14.0))],
)
def test_sequence_matches_the_direct_evaluation(lam, long, pitch):
    # The map-at-a-time evaluation against the direct one that holds every map
    # (_reference_assess). # common practice
    grid = RetinalGrid((56, 48), *pitch)  # at 30 um the 1.5 mrad disc is a point
    frames, maps, pulses, counted = _mixed_sequence(grid, long)
    res = ex.assess_sequence(frames, grid, lam)
    ref = _reference_assess(maps, pulses, grid, lam)
    for r in ex.RULES:
        got, want = res.rules[r], ref["rules"][r]
        assert got.ratio == pytest.approx(want.ratio, rel=1e-12, abs=0)
        assert (got.x_um, got.y_um, got.alpha_mrad, got.hazard) == (
            want.x_um,
            want.y_um,
            want.alpha_mrad,
            want.hazard,
        )
        assert (got.n_pulses, got.window_start_ms, got.c_p) == (
            want.n_pulses,
            want.window_start_ms,
            want.c_p,
        )
    assert [(a.alpha_mrad, a.rule, a.hazard) for a in res.angles] == [
        (a[0], a[4], a[5]) for a in ref["angles"]
    ]
    for got, want in zip(res.angles, ref["angles"], strict=True):
        assert got.max_disc_power_mw == pytest.approx(want[2], rel=1e-12, abs=0)
        assert got.worst_ratio == pytest.approx(want[3], rel=1e-12, abs=0)
    # frames of one map are interleaved here: the dose sums differ in order only
    np.testing.assert_allclose(res.dose_map_mj_per_mm2, ref["dose"], rtol=1e-6, atol=0)
    np.testing.assert_allclose(res.peak_irradiance_map_mw_per_mm2, ref["peak"], rtol=1e-6, atol=0)
    if lam == 450.0:
        assert "photochemical" in {a.hazard for a in res.angles}
    # each lazy map is read a bounded number of times: once to group it, then twice
    for lazy in counted:
        assert 1 <= lazy.calls <= 3
    assert CAUTIONS in res.summary() and res.edition == EDITION
    assert res.as_dict()["caution"] == CAUTIONS


def test_frames_of_one_map_are_grouped():
    grid = RetinalGrid((16, 16), 10.0, 10.0)
    a, b = _spots(grid, 2, seed=3)
    base = b * np.float32(1.0)
    fresh = _Counted(a)
    frames = ex._as_frames(
        [
            ex.Frame(a, _train(0)),
            ex.Frame(fresh, _train(1)),  # a fresh copy: a map of its own
            ex.Frame(fresh, _train(2)),  # the same callable
            ex.Frame(lambda: base, _train(3)),
            ex.Frame(base, _train(4)),  # the array the callables return
            ex.Frame(lambda: base, _train(5)),
            ex.Frame(_not_read, _train(6), key="k"),
            ex.Frame(a, _train(7), key="k"),  # the key decides, not the array
        ],
        grid,
    )
    groups = ex._map_groups(frames)
    assert [g.frames for g in groups] == [[0], [1, 2], [3, 4, 5], [6, 7]]
    assert fresh.calls == 1


def test_lazy_frames_give_the_closed_form_figures():
    # Full field, 10 s: the margin of test_full_field_within_the_limit_with_its_margin.
    grid = RetinalGrid((256, 256), 10.0, 10.0)
    frame = ex.Frame(lambda: np.full(grid.shape, 0.1), (ex.Pulse(0.0, 10_000.0),))
    assert frame.is_lazy and not ex.Frame(np.zeros(grid.shape), ()).is_lazy
    res = ex.assess_sequence([frame], grid, 880.0)
    assert res.margin == pytest.approx(_full_field_limit_mw_per_mm2(10.0) / 0.1, rel=1e-2)
    same = ex.evaluate_map(lambda: np.full(grid.shape, 0.1), grid, 880.0, 10.0)
    assert same.worst_ratio == res.worst_ratio
    # Ten lazy frames of 1 s each, back to back: dose = irradiance x time.
    frames = [
        ex.Frame(lambda: np.full(grid.shape, 0.1), (ex.Pulse(1000.0 * k, 1000.0),))
        for k in range(10)
    ]
    res10 = ex.assess_sequence(frames, grid, 880.0, alphas_mrad=(100.0,))
    assert res10.max_dose_mj_per_mm2 == pytest.approx(0.1 * 10.0, rel=1e-6)
    assert res10.peak_irradiance_mw_per_mm2 == pytest.approx(0.1, rel=1e-6)
    assert CAUTIONS in res10.summary() and res10.edition == EDITION


def test_load_irradiance_checks_the_map():
    grid = RetinalGrid((8, 6), 5.0, 5.0)
    arr = np.ones(grid.shape)
    got = ex.Frame(lambda: arr, ()).load_irradiance_mw_per_mm2(grid)
    assert got.dtype == np.float32 and got.shape == grid.shape
    assert ex.Frame(arr, ()).load_irradiance_mw_per_mm2().dtype == np.float32
    with pytest.raises(ConfigError) as err:
        ex.Frame(lambda: np.ones((4, 4)), ()).load_irradiance_mw_per_mm2(grid)
    assert err.value.field == "irradiance_mw_per_mm2" and "(8, 6)" in err.value.allowed


def test_bad_lazy_frames_are_named():
    grid = RetinalGrid((8, 8), 5.0, 5.0)
    ok = ex.Frame(np.ones(grid.shape), _train(0))

    def broken() -> np.ndarray:
        raise OSError("no such file: map7.npy")

    with pytest.raises(ConfigError) as err:
        ex.assess_sequence([ok, ex.Frame(broken, _train(1))], grid, 880.0)
    assert err.value.field == "frames[1].irradiance_mw_per_mm2"
    assert "callable" in err.value.allowed and "map7.npy" in err.value.detail
    with pytest.raises(ConfigError) as err:
        ex.assess_sequence([ok, ex.Frame(lambda: -np.ones(grid.shape), _train(1))], grid, 880.0)
    assert err.value.field == "frames[1].irradiance_mw_per_mm2" and ">= 0" in err.value.allowed
    with pytest.raises(ConfigError) as err:
        ex.assess_sequence([ok, ex.Frame(lambda: np.ones((4, 4)), _train(1), key="m")], grid, 880.0)
    assert err.value.field == "frames[1].irradiance_mw_per_mm2"
    with pytest.raises(ConfigError) as err:
        ex.assess_sequence([ex.Frame(np.ones(grid.shape), _train(0), key=7)], grid, 880.0)
    assert err.value.field == "frames[0].key"


def _traced_peak_bytes(frames, grid) -> int:
    tracemalloc.start()
    try:
        ex.assess_sequence(frames, grid, 880.0, alphas_mrad=(1.5, 5.0, 20.0, 50.0))
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def _lazy_from_disk(tmp_path, grid, n) -> list:
    # Each frame reads its own map from disk when asked (demo maps: one spot each).
    rng = np.random.default_rng(5)
    x, y = grid.coords_um()
    frames = []
    for k in range(n):
        cx, cy = rng.uniform(-1500.0, 1500.0, 2)
        spot = np.exp(-((x - cx) ** 2 + (y - cy) ** 2) / (2 * 200.0**2)) * (1 + k % 3)
        path = tmp_path / f"map{k}.npy"
        np.save(path, spot.astype(np.float32))
        pulses = ex.periodic_pulses(10.0, frequency_hz=20.0, duration_ms=200.0, start_ms=200.0 * k)
        frames.append(ex.Frame(lambda path=path: np.load(path), pulses, f"spot {k}"))
    return frames


@pytest.mark.parametrize("search", [True, False])
def test_memory_does_not_grow_with_the_number_of_frames(monkeypatch, tmp_path, search):
    # 512 x 512 float32 maps of 1 MiB each, all distinct, read lazily from disk. Holding
    # them would take 40 maps (and 40 spectra); the sweep holds one at a time.
    # numpy allocations are traced by tracemalloc. # common practice
    if search:
        monkeypatch.setattr(ex, "_SEARCH_MIN_SAMPLES", 0)
    grid = RetinalGrid((512, 512), 10.0, 10.0)
    map_bytes = grid.rows * grid.cols * 4
    frames = _lazy_from_disk(tmp_path, grid, 40)
    _traced_peak_bytes(frames[:2], grid)  # compiles the kernels outside the measurement
    peak_40 = _traced_peak_bytes(frames, grid)
    peak_10 = _traced_peak_bytes(frames[:10], grid)
    assert peak_40 < peak_10 + map_bytes
    if search:
        # dose and peak maps (float64), the map and its prefix sums (float64), pooled maps,
        # and the kernel spectrum of each of the 4 angles at its pooled size
        assert peak_40 < 16 * map_bytes
    else:
        # plus the map's spectrum, the kernel spectrum of each of the 4 angles, FFT work
        assert peak_40 < 25 * map_bytes


def test_shared_maxima_cache_gives_the_same_assessment(monkeypatch):
    # Keyed maps whose maxima were found in one assessment are taken from the cache in
    # the next; the results are those of a fresh assessment. # common practice
    monkeypatch.setattr(ex, "_SEARCH_MIN_SAMPLES", 0)
    grid = RetinalGrid((64, 60), 12.0, 12.0)
    a, b = _spots(grid, 2, seed=11)
    frames = [
        ex.Frame(a, _train(0), "a", key="map-a"),
        ex.Frame(b, _train(10), "b", key="map-b"),
    ]
    cache: dict = {}
    whole = ex.assess_sequence(frames, grid, 880.0, maxima_cache=cache)
    assert cache
    alone = ex.assess_sequence(frames[1:], grid, 880.0, maxima_cache=cache)
    fresh = ex.assess_sequence(frames[1:], grid, 880.0)
    assert alone.worst_ratio == fresh.worst_ratio
    assert [x.max_disc_power_mw for x in alone.angles] == [
        x.max_disc_power_mw for x in fresh.angles
    ]
    assert whole.worst_ratio == ex.assess_sequence(frames, grid, 880.0).worst_ratio

"""Retinal exposure limits, pulse-train rules and the extended-source evaluation.

Sources: Directive 2006/25/EC, Annex II, Tables 2.5 and 2.6 (seen in a
consolidated copy and the Norwegian transposition), and the 2000-edition values
of its Table 2.2 as reproduced in BGI 832, Table 6a (IEC 60825-1:2007). The
2013/2014 breakpoints are recalled, not checked against the text: tests that
use them say ``# from memory``. Expected values are derived here from the
published formulas, never pasted from the code's output.
"""

from __future__ import annotations

import math
import tracemalloc
from dataclasses import replace

import numpy as np
import pytest

from stimplan import exposure as ex
from stimplan.cautions import CAUTION_SHORT, CAUTIONS, EDITION
from stimplan.errors import ConfigError
from stimplan.grid import RetinalGrid

from .test_exposure_bounds import subsampled_disc_mm2

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
    # Source: Directive 2006/25/EC, Annex II, Table 2.2, 700-1050 nm, 1.8e-5 s to 10 s:
    # 18 C_A C_E t^0.75 J/m^2 (as reproduced in BGI 832, Table 6a). Valid for t <= 10 s.
    assert 1.8e-5 <= t <= 10.0
    return 18.0 * c_a_formula(lam) * c_e * t**0.75


# --------------------------------------------------------------------------
# Correction factors
# --------------------------------------------------------------------------


def test_t2_at_1_5_and_100_mrad():
    # REFERENCES.md [pub]: T2 = 10 * 10^((alpha - 1.5)/98.5) s between 1.5 and 100 mrad.
    assert ex.t2_s(1.5) == pytest.approx(10.0)
    assert ex.t2_s(100.0) == pytest.approx(100.0)
    assert ex.t2_s(0.5) == pytest.approx(10.0)
    assert ex.t2_s(300.0) == pytest.approx(100.0)
    assert ex.t2_s(50.0) == pytest.approx(10 * 10 ** ((50 - 1.5) / 98.5))


# --------------------------------------------------------------------------
# MPE values
# --------------------------------------------------------------------------


def test_ns_plateau_and_long_exposure_values():
    # 2014 tables, 700-1050 nm: 2e-3 C_A C_E J/m^2 from 1e-11 s to 5 us; beyond T2 a constant
    # irradiance 18 C_A C_C C_E T2^-0.25 W/m^2. # from memory (REFERENCES.md [mem])
    h_ns = ex.corneal_mpe(880, 1e-9, 1.0).radiant_exposure_j_per_m2
    assert h_ns == pytest.approx(2e-3 * c_a_formula(880))
    # Source: Directive 2006/25/EC, Table 2.2 (BGI 832, Table 6a): 5e-3 C_A C_E from 1 ns
    # to 18 us; the value used may only be lower.
    assert h_ns <= 5e-3 * c_a_formula(880)
    alpha = 20.0
    t2 = 10 * 10 ** ((alpha - 1.5) / 98.5)
    mpe = ex.corneal_mpe(880, 1000.0, alpha)
    assert mpe.irradiance_w_per_m2 == pytest.approx(
        18 * c_a_formula(880) * (alpha / 1.5) * t2**-0.25
    )


def _h(lam, t, alpha):
    return ex.corneal_mpe(lam, t, alpha).radiant_exposure_j_per_m2


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


def test_pulses_of_different_widths_and_pauses():
    # Source: Directive 2006/25/EC, Annex II, Table 2.6, rule 2 (any group of pulses).
    # A 1 s pulse train at 40 Hz (5 ms), a pause, then 20 ms pulses at 10 Hz at half power:
    # the scale multiplies the power; rule 2 includes the whole timeline.
    first = ex.periodic_pulses(5.0, frequency_hz=40.0, count=40)
    second = ex.periodic_pulses(20.0, period_ms=100.0, count=10, start_ms=3000.0, scale=0.5)
    res = ex.evaluate_train(first + second, 880.0, 1.5, 1.0, eye=ex.EyeModel(transmission=TAU))
    total_energy = 40 * 0.005 + 10 * 0.5 * 0.02  # mJ at 1 mW
    t_all = 3.0 + 0.9 + 0.02
    whole = total_energy / retinal_energy_limit_mj(h_thermal_mid(880, t_all, 1.0))
    assert res.ratio("average_power") >= whole * (1 - 1e-12)
    assert res.n_pulses == 50


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
    # (Directive 2006/25/EC, Table 2.5), C_E = 100/1.5, and for t <= 10 s
    # H = 18 C_A C_E t^0.75; retinal irradiance tau H A_7mm / t / (pi (0.1 x 17 mm)^2 / 4).
    d_mm = 100.0 * F_EYE_MM * 1e-3
    return retinal_energy_limit_mj(h_thermal_mid(880, t, 100.0 / 1.5)) / t / (math.pi * d_mm**2 / 4)


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
    loose = ex.ProtocolCap(1e4, 1e4)
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
        # a loose angle tolerance: fewer angles, the same arrays
        ex.assess_sequence(frames, grid, 880.0, alphas_mrad=(1.5, 5.0, 20.0, 50.0), tolerance=0.1)
        return tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def _lazy_from_disk(tmp_path, grid, n, distinct=None) -> list:
    # Each frame reads its own map from disk when asked (demo maps: one spot each; with
    # ``distinct``, frame k shows the spot of frame k % distinct, from its own file).
    rng = np.random.default_rng(5)
    x, y = grid.coords_um()
    centres = rng.uniform(-1500.0, 1500.0, (distinct or n, 2))
    frames = []
    for k in range(n):
        j = k % len(centres)
        cx, cy = centres[j]
        spot = np.exp(-((x - cx) ** 2 + (y - cy) ** 2) / (2 * 200.0**2)) * (1 + j % 3)
        path = tmp_path / f"map{k}.npy"
        np.save(path, spot.astype(np.float32))
        pulses = ex.periodic_pulses(10.0, frequency_hz=20.0, duration_ms=200.0, start_ms=200.0 * k)
        frames.append(ex.Frame(lambda path=path: np.load(path), pulses, f"spot {k}"))
    return frames


def test_frames_of_one_map_are_grouped():
    # common practice: frames that show one map are read once.
    from stimplan.exposure.frames import as_frames, map_groups

    grid = RetinalGrid((16, 16), 10.0, 10.0)
    a, b = _spots(grid, 2, seed=3)
    base = b * np.float32(1.0)
    fresh = _Counted(a)
    frames = as_frames(
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
    groups = map_groups(frames)
    assert [g.frames for g in groups] == [[0], [1, 2], [3, 4, 5], [6, 7]]
    assert fresh.calls == 1


def test_lazy_frames_give_the_closed_form_figures():
    # Full field, 5 s: the worst acceptance angle is 100 mrad (C_E = 100/1.5), and the
    # row is 18 C_A C_E t^0.75 (Directive 2006/25/EC, Table 2.2, 1.8e-5 to 10 s).
    grid = RetinalGrid((256, 256), 10.0, 10.0)
    eye = ex.EyeModel(transmission=TAU)
    frame = ex.Frame(lambda: np.full(grid.shape, 0.1), (ex.Pulse(0.0, 5_000.0),))
    assert frame.is_lazy and not ex.Frame(np.zeros(grid.shape), ()).is_lazy
    res = ex.assess_sequence([frame], grid, 880.0, eye=eye)
    assert res.margin == pytest.approx(_full_field_limit_mw_per_mm2(5.0) / 0.1, rel=2e-2)
    assert res.margin <= _full_field_limit_mw_per_mm2(5.0) / 0.1 * (1 + 1e-6)  # a bound
    frames = [
        ex.Frame(lambda: np.full(grid.shape, 0.1), (ex.Pulse(1000.0 * k, 1000.0),))
        for k in range(10)
    ]
    res10 = ex.assess_sequence(frames, grid, 880.0, alphas_mrad=(100.0,), eye=eye)
    assert res10.max_dose_mj_per_mm2 == pytest.approx(0.1 * 10.0, rel=1e-6)
    assert res10.peak_irradiance_mw_per_mm2 == pytest.approx(0.1, rel=1e-6)
    assert CAUTIONS in res10.summary() and res10.edition == EDITION


def test_shared_maxima_cache_gives_the_same_assessment():
    # common practice: keyed maps' maxima taken from the cache give a fresh assessment's
    # results.
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
    assert alone.notes == fresh.notes  # the same notes, also the count of loose maps
    assert whole.worst_ratio == ex.assess_sequence(frames, grid, 880.0).worst_ratio


def test_memory_does_not_grow_with_the_number_of_frames(tmp_path):
    # common practice: lazy frames are read one at a time, so the peak memory of an
    # assessment is set by the grid, not by how many frames the sequence has.
    grid = RetinalGrid((160, 160), 24.0, 24.0)
    (tmp_path / "few").mkdir()
    (tmp_path / "many").mkdir()
    # the same four maps, shown by 4 or by 16 frames (each frame reads its own file): the
    # work per map is then the same, only the number of frames differs
    ex.assess_sequence(
        _lazy_from_disk(tmp_path / "few", grid, 4), grid, 880.0
    )  # compile, plan FFTs
    few = _traced_peak_bytes(_lazy_from_disk(tmp_path / "few", grid, 4), grid)
    many = _traced_peak_bytes(_lazy_from_disk(tmp_path / "many", grid, 16, distinct=4), grid)
    assert many <= few * 1.25
    assert many < 64 * grid.rows * grid.cols * 4  # a few padded FFTs, not one per frame


def test_a_two_map_sequence_against_a_direct_evaluation_at_every_place():
    # The reference evaluates, at every sample centre and on a grid of angles, the
    # timeline of that place (each pulse carrying its map's disc power there) with the
    # public single-place rules; the sequence bound must hold every one of them.
    # common practice: a bound over places holds each place; the single-place rules
    # themselves are pinned to the Directive's tables in test_exposure_limits.py.
    from scipy.signal import correlate

    n, p = 16, 40.0
    grid = RetinalGrid((n, n), p, p)
    m1 = np.zeros((n, n), np.float32)
    m2 = np.zeros((n, n), np.float32)
    m1[3:7, 3:7] = 5.0
    m2[5:12, 8:14] = 3.0
    p1 = ex.periodic_pulses(5.0, frequency_hz=20.0, count=20)
    p2 = ex.periodic_pulses(5.0, frequency_hz=20.0, count=20, start_ms=20.0)
    got = ex.assess_sequence([ex.Frame(m1, p1), ex.Frame(m2, p2)], grid, 880.0)
    brute = 0.0
    for a in np.geomspace(1.5, 100.0, 14):
        k = subsampled_disc_mm2(a * F_EYE_MM, p)
        d1 = correlate(m1.astype(np.float64), k, mode="same", method="direct")
        d2 = correlate(m2.astype(np.float64), k, mode="same", method="direct")
        for i in range(n):
            for j in range(n):
                if d1[i, j] <= 0 and d2[i, j] <= 0:
                    continue
                pulses = [replace(q, scale=float(d1[i, j])) for q in p1] + [
                    replace(q, scale=float(d2[i, j])) for q in p2
                ]
                t = ex.evaluate_train(pulses, 880.0, float(a), 1.0, eye=ex.HUMAN_EYE)
                brute = max(brute, t.worst_ratio)
    assert got.worst_ratio >= brute * (1 - 2e-3)  # the reference kernel is subsampled
    assert got.found_ratio <= got.worst_ratio


def test_loose_maps_are_counted_also_from_the_cache():
    # A checkered plateau (two levels) wider than the refinement's cell budget keeps the
    # grown-disc bound at small discs (neither the peak times the disc area nor block
    # sums are tight on it); the note that counts such maps must not change when the
    # maxima come from a shared cache. (common practice)
    grid = RetinalGrid((64, 64), 10.0, 10.0)
    plateau = np.zeros(grid.shape, np.float32)
    plateau[8:56, 8:56] = 2.0
    plateau[8:56:2, 8:56:2] = 1.5
    plateau[9:56:2, 9:56:2] = 1.5
    frames = [ex.Frame(plateau, _train(0), "p", key="plateau")]
    cache: dict = {}
    first = ex.assess_sequence(frames, grid, 880.0, maxima_cache=cache)
    again = ex.assess_sequence(frames, grid, 880.0, maxima_cache=cache)
    loose = [n for n in first.notes if "stopped at its budget" in n]
    assert loose and [n for n in again.notes if "stopped at its budget" in n] == loose

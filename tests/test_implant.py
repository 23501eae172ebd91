"""Implant geometry, rasterising and readout, checked against closed-form geometry."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from stimplan.errors import ConfigError
from stimplan.grid import RetinalGrid
from stimplan.implant import (
    Implant,
    centred_hexagonal_number,
    disc_quadrant_area,
    implant_preset,
    polygon_quadrant_area,
    silicon_responsivity_limit_a_per_w,
)
from stimplan.optics.eye import eye_preset

SQRT3 = math.sqrt(3.0)


def _grid_for(pitch_um: float, n: int = 512, per_pitch: float = 10.0) -> RetinalGrid:
    d = pitch_um / per_pitch
    return RetinalGrid((n, n), d, d)


# -- exact intersection areas against scipy quadrature ---------------------------------


@pytest.mark.parametrize(
    "X,Y", [(0.3, -0.2), (-0.7, 0.9), (2.0, 0.1), (-0.95, -0.95), (0.0, 0.0), (1.5, 1.5)]
)
def test_disc_quadrant_area_matches_quadrature(X, Y):
    # Source: scipy.integrate.quad of the clipped chord length, area = ∫ L(y) dy.
    r = 1.0

    def chord(y):
        s = math.sqrt(max(r * r - y * y, 0.0))
        return max(0.0, min(X, s) + s)

    ref, _ = integrate.quad(chord, -r, min(Y, r), points=[0.0], limit=200)
    assert float(disc_quadrant_area(r, X, Y)) == pytest.approx(ref, abs=1e-9)


@pytest.mark.parametrize("X,Y", [(0.2, 0.1), (-0.3, 0.5), (0.9, -0.6), (2.0, 2.0), (-2.0, 0.0)])
def test_polygon_quadrant_area_matches_quadrature(X, Y):
    # Source: scipy.integrate.quad over the chords of a convex polygon (half-plane bounds).
    ang = np.deg2rad(30.0 + 60.0 * np.arange(6) + 7.0)
    verts = np.stack([np.cos(ang), np.sin(ang)], axis=1)

    def chord(y):
        lo, hi = -np.inf, np.inf
        for k in range(6):
            (xa, ya), (xb, yb) = verts[k], verts[(k + 1) % 6]
            # inside: (xb-xa)(y-ya) - (yb-ya)(x-xa) >= 0, linear in x
            a = -(yb - ya)
            b = (xb - xa) * (y - ya) + (yb - ya) * xa
            if abs(a) < 1e-15:
                if b < 0:
                    return 0.0
            elif a > 0:
                lo = max(lo, -b / a)
            else:
                hi = min(hi, -b / a)
        hi = min(hi, X)
        return max(0.0, hi - lo)

    ys = verts[:, 1]
    ref, _ = integrate.quad(chord, ys.min(), min(Y, ys.max()), points=list(ys), limit=200)
    assert float(polygon_quadrant_area(verts, X, Y)) == pytest.approx(ref, abs=1e-9)


# -- rasterised area against the analytic area -------------------------------------------


@pytest.mark.parametrize("shape", ["hexagon", "circle", "square"])
@pytest.mark.parametrize("layout", ["hex", "square"])
def test_rasterised_active_area_within_1_percent(shape, layout):
    # Source: elementary geometry: regular hexagon of flat-to-flat a has area (√3/2) a²,
    # circle π d²/4, square s²; the grid sample is 1/10 of the pitch (the 1 % target).
    imp = Implant(
        pitch_um=55.0,
        layout=layout,
        outline="circle",
        diameter_um=400.0,
        active_shape=shape,
        active_fraction=0.5,
        trench_um=4.0,
        rotation_deg=13.0,
        center_x_um=17.3,
        center_y_um=-8.1,
    )
    a = imp.active_size_um
    analytic = {"hexagon": SQRT3 / 2 * a * a, "circle": math.pi * a * a / 4, "square": a * a}[shape]
    cell = SQRT3 / 2 * 55.0**2 if layout == "hex" else 55.0**2
    assert analytic == pytest.approx(0.5 * cell)
    raster = imp.rasterize(_grid_for(55.0, n=128, per_pitch=10.0))
    areas = raster.area_um2()
    assert np.all(np.abs(areas / analytic - 1.0) < 0.01)
    # the analytic clipping is in fact exact to rounding
    assert np.allclose(areas, analytic, rtol=1e-9)


def test_coverage_fractions_are_in_unit_interval_and_cells_tile():
    # Source: regular hexagons tile the plane (hexagonal lattice Voronoi cells): the cells'
    # coverage sums to at most 1 in every sample and to n × (√3/2) p² in total.
    imp = Implant(pitch_um=40.0, rings=4, active_fraction=0.7, rotation_deg=21.0)
    grid = _grid_for(40.0, n=256, per_pitch=7.3)
    raster = imp.rasterize(grid, "cell")
    cov = raster.coverage_image()
    assert cov.dtype == np.float32 and cov.shape == grid.shape
    assert float(cov.max()) <= 1.0 + 1e-6 and float(cov.min()) >= 0.0
    total = float(cov.sum(dtype=np.float64)) * grid.sample_area_um2
    assert total == pytest.approx(imp.n_pixels * SQRT3 / 2 * 40.0**2, rel=1e-6)
    # inside the array the cells leave no gaps
    assert np.count_nonzero(cov > 0.999) > 0.8 * np.count_nonzero(cov > 0)


def test_rasterise_rat_array_on_1024_grid():
    # common practice: every pixel of a rotated array gets its row of the coverage matrix
    # (speed: benchmarks/geometry_speed.py)
    imp = implant_preset("rat_55um", rotation_deg=7.0)
    grid = RetinalGrid((1024, 1024), 1.5, 1.5)
    raster = imp.rasterize(grid)
    assert raster.n_pixels == imp.n_pixels
    assert np.all(np.diff(raster.matrix.indptr) > 0)


# -- pixel counts and numbering ------------------------------------------------------------


@pytest.mark.parametrize("k", [0, 1, 2, 3, 5, 8, 11])
def test_hexagonal_rings_count(k):
    # Source: centred hexagonal numbers 3k(k+1)+1 (OEIS A003215): 1, 7, 19, 37, 91, 217, 397.
    expected = 3 * k * (k + 1) + 1
    assert centred_hexagonal_number(k) == expected
    assert Implant(pitch_um=50.0, rings=k, active_fraction=0.5).n_pixels == expected
    # the same patch from its outline: corner to corner (2k+1) pitches, centres inside
    by_size = Implant(pitch_um=50.0, diameter_um=(2 * k + 1) * 50.0, active_fraction=0.5)
    assert by_size.n_pixels == expected


def test_square_block_and_circle_counts():
    # Source: a rows × cols block has rows·cols pixels; a disc of radius R holds about
    # πR²/A_cell lattice points (Gauss circle problem, error O(R)).
    assert (
        Implant(
            pitch_um=30.0, layout="square", outline="rectangle", rows=4, cols=7, active_fraction=0.5
        ).n_pixels
        == 28
    )
    assert (
        Implant(
            pitch_um=30.0, layout="hex", outline="square", rows=5, cols=5, active_fraction=0.5
        ).n_pixels
        == 25
    )
    imp = Implant(pitch_um=20.0, outline="circle", diameter_um=1000.0, active_fraction=0.5)
    expected = math.pi * 500.0**2 / (SQRT3 / 2 * 20.0**2)
    assert imp.n_pixels == pytest.approx(expected, rel=0.03)


def test_numbering_is_stable_under_placement():
    # common practice: pixels numbered top row first, left to right, in the array frame.
    base = Implant(pitch_um=50.0, rings=3, active_fraction=0.5)
    moved = Implant(
        pitch_um=50.0,
        rings=3,
        active_fraction=0.5,
        rotation_deg=33.0,
        center_x_um=120.0,
        center_y_um=-40.0,
    )
    local = base.local_centers_um
    assert np.array_equal(local, moved.local_centers_um)
    assert np.array_equal(base.centers_um, local)
    # top row first, x increasing within a row
    rows = base.lattice_rows
    assert np.all(np.diff(rows) <= 0)
    same = np.diff(rows) == 0
    assert np.all(np.diff(local[:, 0])[same] > 0)
    # placement is a rotation about the array centre followed by the offset
    th = math.radians(33.0)
    rot = np.array([[math.cos(th), -math.sin(th)], [math.sin(th), math.cos(th)]])
    expected = local @ rot.T + np.array([120.0, -40.0])
    assert np.allclose(moved.centers_um, expected)
    # hexagonal neighbour distance is the pitch
    d = np.hypot(*(local[:, None, :] - local[None, :, :]).transpose(2, 0, 1))
    d[d == 0] = np.inf
    assert d.min(axis=1) == pytest.approx(np.full(base.n_pixels, 50.0))


def test_label_image_matches_pixel_numbers():
    # common practice
    imp = Implant(pitch_um=50.0, rings=2, active_fraction=0.6, rotation_deg=10.0, center_x_um=30.0)
    grid = _grid_for(50.0, n=200, per_pitch=10.0)
    labels = imp.rasterize(grid).label_image()
    for i, (x, y) in enumerate(imp.centers_um):
        r, c = grid.index_of(x, y)
        assert labels[int(round(r)), int(round(c))] == i
    assert labels.min() == -1


# -- readout --------------------------------------------------------------------------------


def test_readout_uniform_irradiance():
    # Source: power = irradiance × area; photocurrent = responsivity × power.
    imp = Implant(
        pitch_um=55.0, rings=3, active_shape="circle", active_fraction=0.5, rotation_deg=5.0
    )
    grid = _grid_for(55.0, n=256, per_pitch=9.0)
    e = 1.7  # mW/mm²
    ro = imp.readout(np.full(grid.shape, e, np.float32), grid, responsivity_a_per_w=0.5)
    area_mm2 = imp.active_area_um2 * 1e-6
    assert ro.n_pixels == imp.n_pixels
    assert np.allclose(ro.power_uw, e * area_mm2 * 1e3, rtol=1e-5)
    assert np.allclose(ro.mean_irradiance_mw_per_mm2, e, rtol=1e-5)
    assert np.allclose(ro.min_irradiance_mw_per_mm2, e) and np.allclose(
        ro.max_irradiance_mw_per_mm2, e
    )
    assert np.allclose(ro.photocurrent_ua, 0.5 * ro.power_uw)


def test_readout_linear_ramp_mean_is_value_at_centre():
    # Source: the mean of a linear function over a centrally symmetric region equals its value
    # at the centre of symmetry (the centroid).
    imp = Implant(
        pitch_um=55.0,
        rings=3,
        active_shape="hexagon",
        active_fraction=0.6,
        rotation_deg=17.0,
        center_x_um=11.0,
    )
    grid = _grid_for(55.0, n=300, per_pitch=10.0)
    X, Y = grid.coords_um()
    irr = (10.0 + 0.003 * X + 0.002 * Y) * np.ones(grid.shape)
    ro = imp.readout(irr.astype(np.float32), grid)
    cx, cy = imp.centers_um.T
    assert np.allclose(ro.mean_irradiance_mw_per_mm2, 10.0 + 0.003 * cx + 0.002 * cy, rtol=1e-5)
    assert np.all(ro.min_irradiance_mw_per_mm2 < ro.mean_irradiance_mw_per_mm2)
    assert np.all(ro.max_irradiance_mw_per_mm2 > ro.mean_irradiance_mw_per_mm2)


def test_silicon_responsivity_limit():
    # Source: photon energy E = hc/λ, hc/e = 1.23984 eV·µm, so R_max = λ[µm]/1.23984 A/W.
    assert silicon_responsivity_limit_a_per_w(880.0) == pytest.approx(0.880 / 1.23984, rel=1e-5)
    with pytest.raises(ConfigError):
        silicon_responsivity_limit_a_per_w(1500.0)


def test_readout_equals_the_sparse_coverage_product(rng):
    # Source: scipy.sparse CSR matrix-vector product (the readout is coverage @ irradiance);
    # the extremes against numpy min/max over the samples each pixel covers by more than half.
    imp = Implant(pitch_um=55.0, rings=2, active_fraction=0.5)
    grid = _grid_for(55.0, n=96, per_pitch=5.0)
    irr = rng.uniform(0.0, 3.0, grid.shape).astype(np.float32)
    ro = imp.readout(irr, grid)
    m = imp.rasterize(grid, "active").matrix
    want = (m @ irr.reshape(-1).astype(np.float64)) * grid.sample_area_mm2 * 1e3
    np.testing.assert_allclose(ro.power_uw, want, rtol=1e-12)
    flat = irr.reshape(-1).astype(np.float64)
    for i in range(m.shape[0]):
        a, b = m.indptr[i], m.indptr[i + 1]
        strong = m.indices[a:b][m.data[a:b] > 0.5]
        assert ro.min_irradiance_mw_per_mm2[i] == flat[strong].min()
        assert ro.max_irradiance_mw_per_mm2[i] == flat[strong].max()


def test_readout_rejects_bad_irradiance():
    # common practice
    imp = Implant(pitch_um=55.0, rings=1, active_fraction=0.5)
    grid = _grid_for(55.0, n=64, per_pitch=5.0)
    with pytest.raises(ConfigError) as err:
        imp.readout(np.zeros((3, 3)), grid)
    assert err.value.field == "irradiance_mw_per_mm2"
    bad = np.zeros(grid.shape)
    bad[0, 0] = np.nan
    with pytest.raises(ConfigError):
        imp.readout(bad, grid)


# -- acuity and presets ----------------------------------------------------------------------


def test_grating_acuity_of_implant():
    # Source: Lorach et al., Nat. Med. 21, 476 (2015): bar width = pixel pitch.
    eye = eye_preset("rat")
    imp = implant_preset("rat_55um")
    assert imp.grating_acuity_cpd(eye) == pytest.approx(eye.um_per_deg / (2 * 55.0))


def test_presets():
    # Source: Palanker et al., Ophthalmology (2020): a 2 × 2 mm array of 378 hexagonal
    # pixels of 100 µm (shared/REFERENCES.md). The rat preset is a demo value.
    rat = implant_preset("rat_55um")
    assert rat.n_pixels == 397
    assert 1150.0 < rat.footprint_width_um < 1300.0
    human = implant_preset("human_100um")
    x0, x1, y0, y1 = human.footprint_extent_um
    assert x1 - x0 <= 2000.0 + 1e-6 and y1 - y0 <= 2000.0 + 1e-6
    assert human.n_pixels == 378
    assert human.pitch_um == 100.0 and human.layout == "hex"
    with pytest.raises(ConfigError):
        implant_preset("cat")
    assert implant_preset("rat_55um", rings=2).n_pixels == 19


# -- validation -------------------------------------------------------------------------------


@pytest.mark.parametrize("pitch", [0.0, -5.0, 1e-9, 1e9])
def test_bad_pitch(pitch):
    # common practice: no implant pixel is under 1 µm or over 5 mm
    with pytest.raises(ConfigError) as err:
        Implant(pitch_um=pitch, rings=2, active_fraction=0.5)
    assert err.value.field == "implant.pitch_um"
    assert "in [1, 5000]" in str(err.value) and "implant pixels" in str(err.value)


@pytest.mark.parametrize("frac", [0.0, -0.1, 1.2])
def test_bad_active_fraction(frac):
    # common practice
    with pytest.raises(ConfigError) as err:
        Implant(pitch_um=50.0, rings=2, active_fraction=frac)
    assert err.value.field == "implant.active_fraction"
    assert "(0, 1]" in str(err.value)


def test_active_area_must_fit_cell_minus_trench():
    # Source: a disc inscribed in a regular hexagon covers π/(2√3) ≈ 0.907 of it.
    ok = Implant(pitch_um=50.0, rings=1, active_shape="circle", active_fraction=0.9)
    assert ok.active_fraction_of_cell == pytest.approx(0.9)
    with pytest.raises(ConfigError) as err:
        Implant(pitch_um=50.0, rings=1, active_shape="circle", active_fraction=0.92)
    assert err.value.field == "implant.active_fraction"
    assert f"{math.pi / (2 * SQRT3):.4g}" in str(err.value)
    with pytest.raises(ConfigError) as err:
        Implant(pitch_um=50.0, rings=1, active_fraction=1.0, trench_um=2.0)
    assert "trench" in str(err.value)
    with pytest.raises(ConfigError) as err:
        Implant(pitch_um=50.0, rings=1, active_diameter_um=49.0, trench_um=2.0)
    assert err.value.field == "implant.active_diameter_um" and "48" in str(err.value)
    with pytest.raises(ConfigError):
        Implant(pitch_um=50.0, rings=1, active_fraction=0.5, trench_um=50.0)
    with pytest.raises(ConfigError):
        Implant(pitch_um=50.0, rings=1)  # neither fraction nor diameter


def test_implant_must_fit_in_field():
    # common practice
    imp = implant_preset("rat_55um")
    small = RetinalGrid((256, 256), 2.0, 2.0)  # 512 µm field, sample edges x in [-257, 255]
    assert not imp.fits_in(small)
    with pytest.raises(ConfigError) as err:
        imp.rasterize(small)
    assert err.value.field == "implant"
    assert "inside the retinal field" in str(err.value) and "x [-257.0, 255.0]" in str(err.value)
    moved = implant_preset("rat_55um", center_x_um=300.0)
    big = RetinalGrid((1024, 1024), 1.5, 1.5)
    with pytest.raises(ConfigError):
        moved.check_fits(big)
    # without the check the part outside the field is cut off
    raster = moved.rasterize(big, check_fit=False)
    assert raster.area_um2().min() < moved.active_area_um2 * 0.5


def test_bad_sizing_is_reported():
    # common practice
    with pytest.raises(ConfigError) as err:
        Implant(pitch_um=50.0, outline="circle", active_fraction=0.5)
    assert err.value.field == "implant.diameter_um"
    with pytest.raises(ConfigError):
        Implant(pitch_um=50.0, layout="square", rings=2, active_fraction=0.5)
    with pytest.raises(ConfigError):
        Implant(pitch_um=50.0, outline="hexagon", rings=2, width_um=100.0, active_fraction=0.5)
    with pytest.raises(ConfigError) as err:
        Implant(pitch_um=50.0, layout="triangle", rings=1, active_fraction=0.5)
    assert err.value.field == "implant.layout"


def test_compiled_quadrant_areas_equal_the_formula(rng):
    # Source: Green's theorem as written in polygon_quadrant_area (itself checked against
    # quadrature above); the compiled grid form used by the rasteriser must agree.
    from stimplan.implant.geometry import polygon_quadrant_grid

    ang = np.linspace(0, 2 * np.pi, 7)[:-1] + 0.3
    verts = np.stack([20 * np.cos(ang), 20 * np.sin(ang)], axis=1)
    xr = rng.uniform(-30, 30, (5, 9))
    yr = rng.uniform(-30, 30, (5, 8))
    got = polygon_quadrant_grid(verts, xr, yr)
    want = polygon_quadrant_area(verts, xr[:, None, :], yr[:, :, None])
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-9)


def test_implant_view_of_a_uniform_field_against_the_published_range():
    # Source: Mathieson et al., Nat. Photonics 6(6), 391-397 (2012), abstract: threshold
    # peak irradiance 0.2-10 mW/mm² (rat retina, 70 µm bipolar pixels). Closed form: the
    # mean of a uniform irradiance over any photodiode is that irradiance.
    from stimplan.implant import implant_view, stimulation_threshold

    imp = implant_preset("rat_55um", rings=3)
    t = stimulation_threshold(imp)
    assert (t.low_mw_per_mm2, t.high_mw_per_mm2) == (0.2, 10.0)
    assert "Mathieson" in t.source and "70 µm bipolar" in t.source
    grid = _grid_for(55.0, n=256, per_pitch=9.0)
    ro = imp.readout(np.ones(grid.shape, np.float32), grid)  # 1 mW/mm² everywhere
    on = np.arange(imp.n_pixels) % 2 == 0
    n_on, n_off = int(on.sum()), int((~on).sum())
    # (scale, ON under 10, OFF over 0.2): 0.1 and 1 mW/mm² are under the high end,
    # 1 and 20 over the low end
    for scale, on_below, off_above in ((0.1, n_on, 0), (1.0, n_on, n_off), (20.0, 0, n_off)):
        d = implant_view(ro, on, threshold=t, scale=scale).as_dict()
        assert (d["on_below"], d["off_above"]) == (on_below, off_above), scale
        assert (d["on_pixels"], d["off_pixels"]) == (n_on, n_off)
    # common practice: no published threshold, no view; the message names the key to give
    with pytest.raises(ConfigError) as info:
        stimulation_threshold(implant_preset("human_100um"))
    assert info.value.field == "implant.threshold_mw_per_mm2"
    assert "under [implant]" in str(info.value)
    own = stimulation_threshold(implant_preset("rat_55um", threshold_mw_per_mm2=[0.03, 0.09]))
    assert own.as_pair() == [0.03, 0.09] and "Mathieson" not in own.source

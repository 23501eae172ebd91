"""Exact disc areas and the bounded largest disc power over continuous centres.

References are closed forms (the area of a disc, the circle-rectangle area by
one-dimensional quadrature in scipy) and a brute force over a fine lattice of
centres written here.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from stimplan.exposure.disc_bound import (
    PreparedMap,
    cell_areas_um2,
    disc_sums_at,
    largest_disc_power,
    summed_area_table,
)


def _cut_area(x0, x1, y0, y1, r):
    # Source: area of {x0<=x<=x1, y0<=y<=y1, x^2+y^2<=r^2} as a 1-D integral of the chord
    # length clipped to [y0, y1], by scipy.integrate.quad
    def chord(x):
        if abs(x) >= r:
            return 0.0
        s = math.sqrt(r * r - x * x)
        return max(0.0, min(y1, s) - max(y0, -s))

    # the chord has kinks where it meets the cell's edges and square-root ends at +-r
    kinks = [r, -r] + [
        sgn * math.sqrt(r * r - y * y) for y in (y0, y1) if abs(y) < r for sgn in (1, -1)
    ]
    inside = sorted(k for k in kinks if x0 < k < x1)
    value, _ = integrate.quad(chord, x0, x1, points=inside or None, limit=200, epsabs=1e-14)
    return value


def test_summed_area_table_against_numpy_cumsum():
    a = np.random.default_rng(0).random((7, 9)).astype(np.float32)
    s = summed_area_table(a)
    # Source: numpy.cumsum along both axes (Crow 1984, summed-area table)
    ref = np.zeros((8, 10))
    ref[1:, 1:] = np.cumsum(np.cumsum(a.astype(np.float64), axis=0), axis=1)
    np.testing.assert_allclose(s, ref, rtol=1e-12)


@pytest.mark.parametrize("r", [0.7, 3.3, 10.0, 41.2])
def test_cell_areas_sum_to_the_disc_area(r):
    px, py = 1.5, 2.5
    areas = cell_areas_um2(r, px, py, int(r / py) + 2, int(r / px) + 2)
    # Source: area of a disc, pi r^2
    assert areas.sum() == pytest.approx(math.pi * r * r, rel=1e-12)


def test_each_cut_cell_area_against_quadrature():
    r, px, py = 4.3, 1.5, 2.5
    hy, hx = 3, 4
    areas = cell_areas_um2(r, px, py, hy, hx)
    for i in range(2 * hy + 1):
        for j in range(2 * hx + 1):
            x0, y0 = (j - hx - 0.5) * px, (i - hy - 0.5) * py
            assert areas[i, j] == pytest.approx(_cut_area(x0, x0 + px, y0, y0 + py, r), abs=1e-11)


def test_disc_sums_at_any_centre_against_quadrature():
    rng = np.random.default_rng(4)
    irr = rng.random((12, 14)).astype(np.float32)
    px, py = 3.0, 2.0
    p = PreparedMap.of(irr, px, py)
    for cx, cy, r in [(10.3, 7.7, 5.2), (0.0, 0.0, 9.0), (30.1, 20.2, 13.0), (5.0, 5.0, 0.4)]:
        ref = 0.0
        for i in range(irr.shape[0]):
            for j in range(irr.shape[1]):
                x0, y0 = (j - 0.5) * px - cx, (i - 0.5) * py - cy
                ref += float(irr[i, j]) * _cut_area(x0, x0 + px, y0, y0 + py, r)
        got = disc_sums_at(p, r, [cx], [cy])[0]
        assert got == pytest.approx(ref * 1e-6, rel=1e-9)


def _speckle(n, seed, cutoff=0.15):
    rng = np.random.default_rng(seed)
    f = rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n))
    fx = np.hypot(*np.meshgrid(np.fft.fftfreq(n), np.fft.fftfreq(n)))
    return (np.abs(np.fft.ifft2(np.fft.fft2(f) * (fx < cutoff))) ** 2).astype(np.float32)


@pytest.mark.parametrize("name", ["speckle", "uniform_disc", "spot", "edge"])
@pytest.mark.parametrize("r_um", [1.0, 4.0, 15.0, 45.0])
def test_the_bound_holds_over_a_fine_lattice_of_centres(name, r_um):
    n, pitch = 48, 2.0
    yy, xx = np.mgrid[:n, :n]
    rad = np.hypot(xx - n / 2, yy - n / 2)
    maps = {
        "speckle": _speckle(n, 2),
        "uniform_disc": (rad <= 9.5).astype(np.float32) * 3.0,
        "spot": (rad <= 1.0).astype(np.float32) * 40.0,
        "edge": (xx > n // 2).astype(np.float32) * 2.0,
    }
    p = PreparedMap.of(maps[name], pitch, pitch)
    m = largest_disc_power(p, r_um, tol=0.009)
    # brute force: centres every quarter sample over the whole map  # common practice
    c = np.arange(-0.5, n - 0.5 + 1e-9, 0.25) * pitch
    cx, cy = np.meshgrid(c, c)
    brute = disc_sums_at(p, r_um, cx.ravel(), cy.ravel()).max()
    assert m.complete
    assert m.bound_mw >= brute * (1 - 1e-12)
    assert m.bound_mw <= m.found_mw * 1.009 * (1 + 1e-9)
    assert m.found_mw == pytest.approx(disc_sums_at(p, r_um, [m.x_um], [m.y_um])[0], rel=1e-12)


def test_a_shift_by_half_a_sample_gives_the_same_bound():
    # The same light on a grid twice as fine, moved by one fine sample (half a coarse
    # sample): the largest disc power over continuous centres is the same, so each
    # bound holds the other's value.  # common practice (translation invariance)
    n = 32
    coarse = _speckle(n, 5)
    fine = np.kron(coarse, np.ones((2, 2), np.float32))
    shifted = np.zeros((2 * n + 2, 2 * n + 2), np.float32)
    shifted[1:-1, 1:-1] = fine
    a = largest_disc_power(PreparedMap.of(fine, 1.0, 1.0), 5.0)
    b = largest_disc_power(PreparedMap.of(shifted, 1.0, 1.0), 5.0)
    assert a.bound_mw >= b.found_mw * (1 - 1e-9)
    assert b.bound_mw >= a.found_mw * (1 - 1e-9)
    c = largest_disc_power(PreparedMap.of(coarse, 2.0, 2.0), 5.0)
    assert c.bound_mw >= a.found_mw * (1 - 1e-9)


def test_an_empty_map_has_no_power():
    m = largest_disc_power(PreparedMap.of(np.zeros((8, 8), np.float32), 1.0, 1.0), 3.0)
    assert m.bound_mw == 0.0 and m.found_mw == 0.0 and m.complete


@pytest.mark.parametrize("name", ["speckle", "uniform"])
@pytest.mark.parametrize("d_um", [9.0, 40.0, 150.0, 220.0])  # 220: a float32 kernel transform
def test_the_fft_round_off_bound_covers_the_float32_transform(name, d_um):
    from scipy.signal import correlate

    from stimplan.exposure.discs import DiscIntegrator, disc_kernel
    from stimplan.grid import RetinalGrid

    n, pitch = 96, 2.0
    irr = _speckle(n, 7) if name == "speckle" else np.full((n, n), 3.0, np.float32)
    grid = RetinalGrid((n, n), pitch, pitch)
    integ = DiscIntegrator(grid, d_um)
    pm = integ.power_map_mw(irr, d_um).astype(np.float64)
    hy = (disc_kernel(d_um, pitch, pitch, n - 1, n - 1).shape[0] - 1) // 2
    kernel = disc_kernel(d_um, pitch, pitch, hy, hy).astype(np.float64)
    # Source: scipy.signal.correlate, direct float64 sums (the reference convolution)
    ref = correlate(irr.astype(np.float64), kernel, mode="same", method="direct")
    a64 = irr.astype(np.float64)
    err = integ.error_bound_mw(float(a64.sum()), float(np.sqrt(np.sum(a64 * a64))), d_um)
    top = ref.max()
    near = ref > 1e-5 * top  # the map zeroes values below 1e-6 of its maximum
    assert np.max(np.abs(pm - ref)[near]) <= err
    assert err < 1e-2 * top  # and the bound is useful

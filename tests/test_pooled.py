"""Block-sum bounds of the largest disc power (stimplan.exposure.pooled).

References are closed forms (the area of a disc; the distance of two
rectangles, sampled here) and a brute force over a fine lattice of centres with
the exact disc sums checked against scipy quadrature in tests/test_disc_bound.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from stimplan.exposure.disc_bound import PreparedMap, disc_sums_at
from stimplan.exposure.pooled import PooledMap, touching_kernel


def _speckle(n: int, seed: int) -> np.ndarray:
    # a fully developed speckle pattern: |band-limited complex Gaussian field|^2 (common practice)
    rng = np.random.default_rng(seed)
    f = rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n))
    fx = np.hypot(*np.meshgrid(np.fft.fftfreq(n), np.fft.fftfreq(n)))
    return (np.abs(np.fft.ifft2(np.fft.fft2(f) * (fx < 0.2))) ** 2).astype(np.float32)


def test_touching_kernel_against_sampled_rectangle_distances():
    # Source: geometry: a disc centred in block A reaches block B only if some point of B
    # is within r of some point of A; the distance is sampled on a fine lattice of both
    # blocks here (sampling can only overestimate it by the lattice spacing).
    r, sx, sy = 23.0, 8.0, 5.0
    k = touching_kernel(r, sx, sy)
    hi, hj = (k.shape[0] - 1) // 2, (k.shape[1] - 1) // 2
    t = np.linspace(0.0, 1.0, 41)
    ax, ay = (a.ravel() for a in np.meshgrid(t * sx, t * sy))
    step = math.hypot(sx, sy) / 40
    for di in range(-hi - 1, hi + 2):
        for dj in range(-hj - 1, hj + 2):
            bx, by = ax + dj * sx, ay + di * sy
            dmin = np.sqrt(
                np.min((ax[:, None] - bx[None, :]) ** 2 + (ay[:, None] - by[None, :]) ** 2)
            )
            inside = abs(di) <= hi and abs(dj) <= hj and k[di + hi, dj + hj] == 1.0
            if dmin < r - step:
                assert inside, (di, dj)
            elif dmin > r + step:
                assert not inside, (di, dj)


@pytest.mark.parametrize("name", ["speckle", "spot", "edge"])
@pytest.mark.parametrize("r_um", [3.0, 15.0, 40.0])
@pytest.mark.parametrize("m", [2, 4, 8])
def test_the_block_bound_holds_over_a_fine_lattice_of_centres(name, r_um, m):
    n, pitch = 40, 2.0
    yy, xx = np.mgrid[:n, :n]
    maps = {
        "speckle": _speckle(n, 3),
        "spot": (np.hypot(xx - 17.3, yy - 22.6) <= 1.5).astype(np.float32) * 40.0,
        "edge": (xx > 29).astype(np.float32) * 2.0,
    }
    irr = maps[name]
    bound = PooledMap(irr, pitch, pitch).bound(2 * r_um, m)
    # brute force: centres every quarter sample over the whole map  # common practice
    p = PreparedMap.of(irr, pitch, pitch)
    c = np.arange(-0.5, n - 0.5 + 1e-9, 0.25) * pitch
    cx, cy = np.meshgrid(c, c)
    brute = disc_sums_at(p, r_um, cx.ravel(), cy.ravel()).max()
    assert bound.bound_mw >= brute * (1 - 1e-12)
    # the candidates are centres on the map, best first
    assert bound.rows.size and np.all((bound.rows >= 0) & (bound.rows <= n - 1))


def test_a_uniform_field_against_the_disc_area():
    # Source: closed form: a disc of radius r wholly inside a uniform field E holds
    # E pi r^2; a block bound cannot be lower, and every block it counts lies within
    # r + 1.5 block diagonals of the centre block's middle (geometry).
    n, pitch, e, r = 200, 1.5, 2.5, 60.0
    irr = np.full((n, n), e, np.float32)
    for m in (4, 8, 16):
        b = PooledMap(irr, pitch, pitch).bound(2 * r, m).bound_mw
        diag = math.hypot(m * pitch, m * pitch)
        assert b >= e * math.pi * r * r * 1e-6 * (1 - 1e-12)
        assert b <= e * math.pi * (r + 1.5 * diag) ** 2 * 1e-6


@pytest.mark.parametrize("name, m", [("speckle", 2), ("spot", 4)])
def test_centres_outside_the_region_hold_no_more_than_its_rest(name, m):
    # Source: brute force over a fine lattice of centres (exact disc sums, checked against
    # scipy quadrature in tests/test_disc_bound.py): outside the box no centre holds more
    # than the rest reported, and the largest lattice value lies inside.  # common practice
    n, pitch, r_um = 48, 2.0, 9.0
    yy, xx = np.mgrid[:n, :n]
    irr = {
        "speckle": _speckle(n, 5) * (1.0 + (np.hypot(xx - 20, yy - 26) < 8)),
        "spot": (np.hypot(xx - 30.2, yy - 12.7) <= 2.5).astype(np.float32) * 40.0,
    }[name]
    p = PreparedMap.of(irr, pitch, pitch)
    c = np.arange(-0.5, n - 0.5 + 1e-9, 0.25)
    ci, cj = (a.ravel() for a in np.meshgrid(c, c, indexing="ij"))
    vals = disc_sums_at(p, r_um, cj * pitch, ci * pitch)
    level = 0.98 * vals.max()
    rows, cols, rest = PooledMap(irr, pitch, pitch).region(2 * r_um, m, level)
    assert rows.start % m == 0 and cols.start % m == 0
    # a centre belongs to the sample whose cell holds it
    si, sj = (np.clip(np.floor(a + 0.5), 0, n - 1) for a in (ci, cj))
    inside = (si >= rows.start) & (si < rows.stop) & (sj >= cols.start) & (sj < cols.stop)
    assert rest < level
    assert (~inside).any()  # the box leaves part of the map out
    if (~inside).any():
        assert vals[~inside].max() <= rest * (1 + 1e-12)
    assert vals[inside].max() == vals.max()
    # finer blocks inside the box, with the rest outside, still bound every centre
    fine = PooledMap(irr, pitch, pitch).bound(2 * r_um, m // 2, (rows, cols, rest))
    assert fine.bound_mw >= vals.max() * (1 - 1e-12)
    assert np.all((fine.rows >= rows.start) & (fine.rows < rows.stop))


def test_the_windowed_disc_power_map_against_scipy_convolution():
    # Source: scipy.signal.fftconvolve (float64, mode "same") of the map with the
    # disc's exact cell areas: the disc power at every sample centre; the windowed
    # map must agree inside its box, near the map's edge too, within its round-off bound.
    from scipy.signal import fftconvolve

    from stimplan.exposure.disc_bound import cell_areas_um2
    from stimplan.exposure.discs import DiscIntegrator, kernel_half
    from stimplan.grid import RetinalGrid

    n, pitch, d = 160, 1.5, 40.0
    grid = RetinalGrid((n, n), pitch, pitch)
    irr = _speckle(n, 9) * 3.0
    integ = DiscIntegrator(grid, d)
    hy, hx = kernel_half(d, pitch, pitch, n, n)
    # the exact cell areas (checked against scipy quadrature in tests/test_disc_bound.py)
    kernel = cell_areas_um2(d / 2.0, pitch, pitch, hy, hx) * 1e-6
    ref = fftconvolve(irr.astype(np.float64), kernel, mode="same")
    a64 = irr.astype(np.float64)
    l1, l2 = float(a64.sum()), float(np.sqrt(np.sum(a64 * a64)))
    for rows, cols in [(slice(60, 76), slice(40, 52)), (slice(0, 8), slice(150, 160))]:
        got, double = integ.window_power_map_mw(irr, d, rows, cols)
        assert double  # a small box is transformed in float64
        err = integ.error_bound_mw(l1, l2, d, double=double)
        assert np.max(np.abs(got - ref[rows, cols])) <= err + 1e-12 * float(ref.max())


def test_the_map_norms_bound_numpys_from_above():
    # Source: numpy's float64 sums (pairwise, Higham 2002, §4.2): the norms feed round-off
    # bounds, so they may only err high, and by no more than float64 rounding
    irr = _speckle(96, 11) * 7.0
    l1, l2 = PooledMap(irr, 1.0, 1.0).norms()
    a = irr.astype(np.float64)
    ref1, ref2 = float(np.abs(a).sum()), float(np.sqrt(np.sum(a * a)))
    assert ref1 <= l1 <= ref1 * (1 + 1e-9)
    assert ref2 <= l2 <= ref2 * (1 + 1e-9)

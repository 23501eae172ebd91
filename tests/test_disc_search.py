"""Disc sums at chosen centres and the search for the largest, against scipy's convolution."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import signal

from stimplan import disc_search as ds
from stimplan import exposure as ex
from stimplan.grid import RetinalGrid


def _direct_map(irr, d_um, px, py):
    # Source: scipy.signal.correlate (direct method) of the map with the disc kernel,
    # zero outside the map: the disc power centred on every sample.
    hy, hx = ds.kernel_half(d_um, px, py, *irr.shape)
    kernel = ds.disc_kernel(d_um, px, py, hy, hx).astype(np.float64)
    return signal.correlate(irr.astype(np.float64), kernel, mode="same", method="fft")


def _maps(n: int, pitch: float, seed: int = 0) -> dict[str, np.ndarray]:
    """Demo maps: speckle, a grating under a Gaussian, two spots on a floor, a lit edge."""
    rng = np.random.default_rng(seed)
    grid = RetinalGrid((n, n), pitch, pitch)
    x, y = grid.coords_um()
    field = rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n))
    spots = np.full((n, n), 0.01)
    spots[n // 8, 3 * n // 4] = 50.0
    spots[n // 2, n // 2] = 30.0
    edge = np.zeros((n, n))
    edge[:, : n // 30] = 1.0
    edge[n // 2 : n // 2 + 8, -6:] = 3.0
    width = n * pitch
    grating = (np.sin(2 * np.pi * x / (width / 6)) > 0) * np.exp(
        -(x**2 + y**2) / (2 * (width / 4) ** 2)
    )
    return {
        "speckle": np.abs(field) ** 2,
        "grating": grating,
        "spots": spots,
        "edge": edge,
    }


@pytest.mark.parametrize("pitch", [(1.0, 1.0), (1.0, 1.3)])
def test_sums_at_centres_equal_the_direct_correlation(pitch):
    # Source: scipy.signal.correlate as the reference disc integral.
    px, py = pitch
    rng = np.random.default_rng(4)
    irr = rng.uniform(0, 1, (90, 70)).astype(np.float32)
    prefix = ds.prefix_sums(irr)
    rr = rng.integers(0, 90, 40)
    cc = rng.integers(0, 70, 40)
    for d in (2.5, 7.0, 33.3, 120.0, 400.0):  # the last is wider than the map
        want = _direct_map(irr, d, px, py)[rr, cc]
        got = ds.DiscSums(d, px, py, irr.shape).at(prefix, irr, rr, cc)
        np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-15)


def test_sum_of_a_uniform_field_is_the_disc_area():
    # Source: area of a circle, pi d^2 / 4 (the kernel is area-weighted).
    irr = np.ones((200, 200), np.float32)
    for d in (10.0, 37.0, 91.0):
        got = ds.DiscSums(d, 1.0, 1.0, irr.shape).at(ds.prefix_sums(irr), irr, [100], [100])[0]
        assert got == pytest.approx(math.pi * (d * 1e-3) ** 2 / 4, rel=1e-3)


@pytest.mark.parametrize("name", ["speckle", "grating", "spots", "edge"])
def test_search_finds_the_largest_disc_power(name):
    # The coarse-to-fine search against the maximum of the full correlation map
    # (scipy.signal.correlate). # common practice
    n, pitch = 384, 1.0
    irr = _maps(n, pitch)[name].astype(np.float32)
    prefix = ds.prefix_sums(irr)
    for d in (9.0, 26.0, 41.0, 70.0, 160.0, 330.0):
        want = float(_direct_map(irr, d, pitch, pitch).max())
        sums = ds.DiscSums(d, pitch, pitch, irr.shape)
        r, c, got = ds.search_max(irr, prefix, sums)
        assert got == pytest.approx(float(sums.at(prefix, irr, [r], [c])[0]), rel=1e-12)
        assert got <= want * (1 + 1e-9)
        assert got >= want * (1 - 2e-3), (name, d)


def test_search_centres_a_plateau_on_the_hot_spot():
    # A disc larger than a one-sample hot spot on a uniform floor holds the same power
    # wherever it covers the spot: the search reports the spot itself. # common practice
    irr = np.full((300, 300), 0.01, np.float32)
    irr[120, 170] = 40.0
    prefix = ds.prefix_sums(irr)
    sums = ds.DiscSums(25.0, 1.0, 1.0, irr.shape)
    r, c, _ = ds.search_max(irr, prefix, sums)
    assert (r, c) == (120, 170)


def test_assessment_by_search_agrees_with_full_disc_maps(monkeypatch):
    # The same sequence assessed with full FFT disc maps and with the search.
    # # common practice
    grid = RetinalGrid((320, 320), 4.0, 4.0)
    maps = _maps(320, 4.0, seed=2)
    frames = [
        ex.Frame(
            maps[k].astype(np.float32),
            tuple(
                ex.periodic_pulses(10.0, frequency_hz=20.0, duration_ms=500.0, start_ms=500.0 * i)
            ),
        )
        for i, k in enumerate(("speckle", "grating", "spots"))
    ]
    full = ex.assess_sequence(frames, grid, 880.0)
    monkeypatch.setattr(ex, "_SEARCH_MIN_SAMPLES", 0)
    searched = ex.assess_sequence(frames, grid, 880.0)
    assert searched.worst_ratio == pytest.approx(full.worst_ratio, rel=2e-3)
    for a, b in zip(searched.angles, full.angles, strict=True):
        assert a.max_disc_power_mw == pytest.approx(b.max_disc_power_mw, rel=2e-3)

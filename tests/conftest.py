"""Shared fixtures: small optical systems that keep the suite fast."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan.optics.system import SLM, Eye, Illumination, OpticalSystem, Relay


def make_system(
    n: int = 256,
    *,
    pitch_um: float = 8.0,
    fill_factor: float = 1.0,
    levels: int = 256,
    profile: str = "gaussian",
    waist_mm: float | None = None,
    zero_order_fraction: float = 0.0,
    pupil_mm: float = 20.0,  # wider than any beam in these tests (the largest plausible pupil)
    transmission: float = 1.0,
    um_per_deg: float = 288.0,
    magnification: float = 1.0,
    wavelength_nm: float = 880.0,
    power_mw: float = 1.0,
    **illum,
) -> OpticalSystem:
    if waist_mm is None:
        waist_mm = n * pitch_um * 1e-3 / 6.0
    return OpticalSystem(
        SLM(n, n, pitch_um, fill_factor, levels, zero_order_fraction=zero_order_fraction),
        Illumination(wavelength_nm, power_mw, profile, waist_mm, **illum),
        Relay(magnification),
        Eye(um_per_deg, pupil_mm, transmission),
    )


@pytest.fixture
def small_system() -> OpticalSystem:
    return make_system()


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(1234)

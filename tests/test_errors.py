"""Bad input raises the project's own error, naming the field, the value and the range."""

from __future__ import annotations

import numpy as np
import pytest

from stimplan.errors import ConfigError, InputFileError, StimplanError
from stimplan.holography import IftaSettings, design_hologram
from stimplan.optics.system import SLM, Illumination, OpticalSystem, Relay
from stimplan.optics.target import Target

from .conftest import make_system


@pytest.mark.parametrize(
    ("kwargs", "field", "allowed"),
    [
        ({"pitch_um": 0.0}, "slm.pitch_um", "in [1, 200]"),
        ({"pitch_um": -8.0}, "slm.pitch_um", "in [1, 200]"),
        ({"fill_factor": 1.2}, "slm.fill_factor", "(0, 1]"),
        ({"phase_levels": 1}, "slm.phase_levels", "[2, 65536]"),
        ({"zero_order_fraction": 1.0}, "slm.zero_order_fraction", "[0, 1)"),
    ],
)
def test_slm_rejects_bad_values(kwargs, field, allowed):
    # common practice: the message names field, value and allowed range
    with pytest.raises(ConfigError) as info:
        SLM(**kwargs)
    msg = str(info.value)
    assert info.value.field == field
    assert field in msg and allowed in msg
    assert repr(next(iter(kwargs.values()))) in msg


def test_illumination_and_relay_ranges():
    with pytest.raises(ConfigError, match=r"illumination.wavelength_nm.*\[400, 1400\]"):
        Illumination(wavelength_nm=-5)
    with pytest.raises(ConfigError, match="illumination.power_mw"):
        Illumination(power_mw=0)
    with pytest.raises(ConfigError, match="relay.magnification"):
        Relay(magnification=0)
    with pytest.raises(ConfigError, match="illumination.profile"):
        Illumination(profile="tophat")


def test_fresnel_lens_too_strong_is_refused():
    # Source: sampling theorem; a quadratic phase is alias-free while its gradient is
    # below pi per pixel, i.e. |f| >= N p^2 / lambda (Goodman, 3rd ed., §5.1 and §2.4).
    with pytest.raises(ConfigError, match="relay.fresnel_focal_mm"):
        OpticalSystem(SLM(512, 512, 8.0), Illumination(880.0), Relay(1.0, fresnel_focal_mm=10.0))
    OpticalSystem(SLM(512, 512, 8.0), Illumination(880.0), Relay(1.0, fresnel_focal_mm=500.0))


def test_target_of_wrong_shape_and_nan():
    system = make_system(64)
    grid = system.design_grid()
    with pytest.raises(ConfigError, match=r"target.intensity.*shape \(64, 64\)"):
        Target.from_intensity(np.ones((32, 64)), grid)
    bad = np.ones((64, 64))
    bad[3, 4] = np.nan
    with pytest.raises(ConfigError, match="target.intensity.*finite"):
        Target.from_intensity(bad, grid)
    with pytest.raises(ConfigError, match="target.intensity.*at least one lit"):
        Target.from_intensity(np.zeros((64, 64)), grid)
    with pytest.raises(ConfigError, match="target.intensity"):
        Target(np.full((64, 64), 2.0), grid)


def test_target_grid_must_match_system():
    a, b = make_system(64), make_system(128)
    t = Target.from_intensity(np.ones((64, 64)), a.design_grid())
    with pytest.raises(ConfigError, match="target.grid"):
        design_hologram(t, b, IftaSettings(iterations=1))


def test_unreadable_image_file(tmp_path):
    bogus = tmp_path / "beam.png"
    bogus.write_text("this is not an image")
    system = OpticalSystem(
        SLM(64, 64, 8.0), Illumination(880.0, 1.0, "file", amplitude_file=str(bogus))
    )
    with pytest.raises(InputFileError) as info:
        system.illumination.amplitude(system.slm)
    assert info.value.field == "illumination.amplitude_file"
    assert "beam.png" in str(info.value)
    missing = Illumination(880.0, 1.0, "file", amplitude_file=str(tmp_path / "none.tif"))
    with pytest.raises(InputFileError, match="no such file"):
        missing.amplitude(system.slm)


def test_image_of_wrong_shape(tmp_path):
    path = tmp_path / "amp.npy"
    np.save(path, np.ones((10, 10)))
    ill = Illumination(880.0, 1.0, "file", amplitude_file=str(path))
    with pytest.raises(InputFileError, match=r"shape \(64, 64\)"):
        ill.amplitude(SLM(64, 64, 8.0))


def test_off_axis_window_that_does_not_fit():
    system = make_system(64)
    grid = system.design_grid()
    t = np.zeros((64, 64), np.float32)
    t[28:36, 28:36] = 1
    target = Target.from_intensity(t, grid)
    too_far = 40 * grid.pitch_x_um
    with pytest.raises(ConfigError) as info:
        design_hologram(target, system, IftaSettings(iterations=1), offset_um=(too_far, 0.0))
    assert info.value.field == "offset_um"
    assert "steerable field" in str(info.value)


def test_ifta_settings_ranges():
    with pytest.raises(ConfigError, match="hologram.method"):
        IftaSettings(method="magic")
    with pytest.raises(ConfigError, match="hologram.iterations"):
        IftaSettings(iterations=0)
    with pytest.raises(ConfigError, match="hologram.mraf_mix"):
        IftaSettings(mraf_mix=0.0)


def test_errors_share_one_family():
    # common practice: one exception family for the CLI to map to exit codes
    assert issubclass(ConfigError, StimplanError)
    assert issubclass(InputFileError, StimplanError)


def test_stimulus_missing_required_parameter_names_it():
    # common practice: a missing key is reported by name, never as a bare TypeError
    from stimplan.stimuli import stimulus_from_dict

    with pytest.raises(ConfigError, match=r"image\.path.*width_um"):
        stimulus_from_dict("image", {})

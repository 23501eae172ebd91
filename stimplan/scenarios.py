"""The scenarios that ship with stimplan, and their one quick variant.

The scenario files ship with the package (``stimplan/data`` is the project's
``stimuli/`` folder). Their numbers are demos of our own, not measured
protocols.

* :data:`SCENARIOS` - the shipped scenarios, by the name a user sees;
* :func:`load_scenario` - one of them as a SequenceSpec, full size or quick;
* :func:`with_slm_pixels` - the one way stimplan resizes an SLM (the quick
  variant, the plugin's SLM-size control).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import replace
from importlib import resources
from pathlib import Path
from types import MappingProxyType

from . import validate
from .errors import ConfigError
from .optics.system import MAX_SLM_PIXELS
from .optics.target import Target
from .sequence import load_sequence

__all__ = [
    "DEMO_SCENARIO",
    "SCENARIOS",
    "scenario_path",
    "load_scenario",
    "with_slm_pixels",
    "scenario_target",
]

#: The shipped scenarios: the name a user sees -> file in ``stimplan/data``.
SCENARIOS: Mapping[str, str] = MappingProxyType(
    {
        "rat grating-acuity demo": "rat_grating_acuity.toml",
        "human letter-acuity demo": "human_letter_acuity.toml",
    }
)

#: The scenario of ``stimplan demo``.
DEMO_SCENARIO = "rat grating-acuity demo"


def scenario_path(name: str = DEMO_SCENARIO) -> Path:
    """Path of a shipped scenario file, by its name in :data:`SCENARIOS` or its file name."""
    file = SCENARIOS.get(name, name)
    if file not in SCENARIOS.values():
        raise ConfigError("scenario", name, "one of " + ", ".join(repr(k) for k in SCENARIOS))
    return Path(str(resources.files("stimplan").joinpath("data", file)))


def with_slm_pixels(system, pixels: int | None):
    """The system with an SLM of ``pixels`` per side and the same pixel pitch.

    The retinal field (``λ f / (p M)``) stays; it is sampled more coarsely
    (or finely). The Gaussian waist and the Fresnel focal length scale with
    the SLM width, so that the beam fills the SLM alike and the zero-order
    disc keeps its size.

    Parameters
    ----------
    system : OpticalSystem
    pixels : int or None
        Pixels per side; ``None`` or 0 keeps the system.

    Returns
    -------
    OpticalSystem
    """
    if not pixels:
        return system
    n = validate.integer("slm pixels per side", pixels, lo=16, hi=MAX_SLM_PIXELS)
    slm = system.slm
    k = n / max(slm.pixels_x, slm.pixels_y)
    ill = replace(system.illumination, waist_mm=system.illumination.waist_mm * k)
    relay = system.relay
    if relay.fresnel_focal_mm is not None:
        relay = replace(relay, fresnel_focal_mm=relay.fresnel_focal_mm * k)
    return replace(system, slm=replace(slm, pixels_x=n, pixels_y=n), illumination=ill, relay=relay)


def load_scenario(name: str = DEMO_SCENARIO, *, quick: bool = False):
    """A shipped scenario as a SequenceSpec; ``quick`` halves the SLM (same field,
    coarser sampling; :func:`with_slm_pixels`)."""
    spec = load_sequence(scenario_path(name))
    if quick:
        slm = spec.system.slm
        half = max(slm.pixels_x, slm.pixels_y) // 2
        spec = replace(spec, system=with_slm_pixels(spec.system, half))
    return spec


def scenario_target(system, name: str = "bars_2px", *, scenario: str = DEMO_SCENARIO):
    """One stimulus of a scenario as an image-domain target on ``system``'s design grid
    (stimuli are in retinal µm: the SLM size does not change them)."""
    spec = load_scenario(scenario)
    grid = system.design_grid()
    return Target.from_intensity(spec.stimuli[name].render(grid), grid, name=name)

"""Compositions: several stimuli on one frame, inversion, masking to an implant.

Composition takes the pointwise maximum: each part keeps its own levels and
the brightest wins, so the result stays in [0, 1] without clipping and
without changing any part where it is alone. (A sum would have to be clipped
where parts overlap, which silently changes the pattern.) Note that a part
with contrast below 1 has a ground level above 0 everywhere, which then
lifts the whole frame.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import validate
from ..errors import ConfigError
from ..grid import RetinalGrid
from ..implant import Implant
from .base import Stimulus, build_stimulus, check_grid, register

__all__ = ["Composite", "Inverted", "Masked", "compose", "MASK_REGIONS"]

MASK_REGIONS = ("active", "footprint")


def _check_stimulus(field: str, value: Any) -> Stimulus:
    if not isinstance(value, Stimulus):
        raise ConfigError(field, type(value).__name__, "a stimulus")
    return value


@register
@dataclass(frozen=True, kw_only=True)
class Composite(Stimulus):
    """Several stimuli on one frame, combined by the pointwise maximum.

    Parameters
    ----------
    stimuli : tuple of Stimulus
        At least one.
    """

    kind = "composite"

    stimuli: tuple[Stimulus, ...]

    def __post_init__(self) -> None:
        items = tuple(self.stimuli) if isinstance(self.stimuli, (list, tuple)) else None
        if not items:
            raise ConfigError("composite.stimuli", self.stimuli, "a non-empty list of stimuli")
        for i, s in enumerate(items):
            _check_stimulus(f"composite.stimuli[{i}]", s)
        object.__setattr__(self, "stimuli", items)

    def render(self, grid: RetinalGrid) -> np.ndarray:
        grid = check_grid(grid)
        out = self.stimuli[0].render(grid)  # a fresh array: safe to update in place
        for s in self.stimuli[1:]:
            np.maximum(out, s.render(grid), out=out)
        return out

    @classmethod
    def _build(cls, p: dict[str, Any], *, eye: Any, pitch_um: Any) -> Composite:
        parts = p.get("stimuli")
        if not isinstance(parts, (list, tuple)) or not parts:
            raise ConfigError("composite.stimuli", parts, "a non-empty list of stimuli")
        built = []
        for i, item in enumerate(parts):
            if isinstance(item, Stimulus):
                built.append(item)
            elif isinstance(item, dict) and "kind" in item:
                rest = {k: val for k, val in item.items() if k != "kind"}
                built.append(build_stimulus(item["kind"], rest, eye=eye, pitch_um=pitch_um))
            else:
                raise ConfigError(f"composite.stimuli[{i}]", item, "a table with a 'kind'")
        return cls(stimuli=tuple(built))


def compose(*stimuli: Stimulus) -> Composite:
    """Several stimuli on one frame (pointwise maximum)."""
    return Composite(stimuli=tuple(stimuli))


@register
@dataclass(frozen=True, kw_only=True)
class Inverted(Stimulus):
    """The complement ``1 - x`` of a stimulus."""

    kind = "inverted"

    stimulus: Stimulus

    def __post_init__(self) -> None:
        _check_stimulus("inverted.stimulus", self.stimulus)

    def render(self, grid: RetinalGrid) -> np.ndarray:
        out = self.stimulus.render(grid)
        return np.subtract(np.float32(1.0), out, out=out if out.flags.writeable else None)

    @classmethod
    def _build(cls, p: dict[str, Any], *, eye: Any, pitch_um: Any) -> Inverted:
        return cls(stimulus=_child(p.get("stimulus"), "inverted.stimulus", eye, pitch_um))


@register
@dataclass(frozen=True, kw_only=True)
class Masked(Stimulus):
    """A stimulus set to zero outside an implant.

    Parameters
    ----------
    stimulus : Stimulus
    implant : Implant
    region : {"active", "footprint"}
        Keep the light on the photodiodes only (each sample weighted by the
        fraction of it that active areas cover), or on the whole array
        (pixel cells and trenches).
    """

    kind = "masked"

    stimulus: Stimulus
    implant: Implant
    region: str = "active"

    def __post_init__(self) -> None:
        _check_stimulus("masked.stimulus", self.stimulus)
        if not isinstance(self.implant, Implant):
            raise ConfigError("masked.implant", type(self.implant).__name__, "an Implant")
        object.__setattr__(
            self, "region", validate.choice("masked.region", self.region, MASK_REGIONS)
        )

    def mask(self, grid: RetinalGrid) -> np.ndarray:
        """The mask, float32 in [0, 1]: fraction of each sample inside the region."""
        region = "active" if self.region == "active" else "cell"
        raster = self.implant.rasterize(check_grid(grid), region, check_fit=False)
        return raster.coverage_image()

    def render(self, grid: RetinalGrid) -> np.ndarray:
        out = self.stimulus.render(grid)
        return np.multiply(out, self.mask(grid), out=out if out.flags.writeable else None)

    @classmethod
    def _build(cls, p: dict[str, Any], *, eye: Any, pitch_um: Any) -> Masked:
        imp = p.get("implant")
        if isinstance(imp, dict):
            imp = Implant(**imp)
        return cls(
            stimulus=_child(p.get("stimulus"), "masked.stimulus", eye, pitch_um),
            implant=imp,
            region=p.get("region", "active"),
        )


def _child(item: Any, field: str, eye: Any, pitch_um: Any) -> Stimulus:
    if isinstance(item, Stimulus):
        return item
    if isinstance(item, dict) and "kind" in item:
        rest = {k: val for k, val in item.items() if k != "kind"}
        return build_stimulus(item["kind"], rest, eye=eye, pitch_um=pitch_um)
    raise ConfigError(field, item, "a stimulus or a table with a 'kind'")

"""Implant presets with the layout rule of each."""

from __future__ import annotations

import dataclasses
from typing import Any

from ..errors import ConfigError
from .layout import (
    Implant,
)
from .photodiode import HUANG_2021_RESPONSIVITY
from .threshold import HUANG_2021, MATHIESON_2012

__all__ = ["CURVE_KEYS", "IMPLANT_PRESETS", "implant_names", "implant_preset"]


IMPLANT_PRESETS: dict[str, dict[str, Any]] = {
    # Demo: a rat array about 1.2 mm across (11 rings: 397 pixels, 1265 µm corner to
    # corner) of 55 µm hexagonal pixels; 60 % active area and a 5 µm trench are demo
    # values. Pixel pitches of 100 to 20 µm have been built (Mathieson 2012; Ho 2019).
    # Threshold: the range of Mathieson 2012, measured with 70 µm bipolar pixels in vitro
    # (a published range for another pixel size; the source text says so).
    # Photodiodes: no published responsivity or diode count for these pixels was found
    # (Huang 2021: flat bipolar pixels this small lose responsivity), so the readout uses
    # the silicon limit and one diode per pixel: its current is an upper bound.
    "rat_55um": dict(
        pitch_um=55.0,
        layout="hex",
        outline="hexagon",
        rings=11,
        active_shape="hexagon",
        active_fraction=0.6,
        trench_um=5.0,
        name="rat_55um",
        threshold_mw_per_mm2=MATHIESON_2012[0],
        threshold_source=MATHIESON_2012[1],
    ),
    # The clinical array of Palanker et al. (2020): 2 × 2 mm, 378 hexagonal pixels of
    # 100 µm. Layout rule (ours; the source gives size, pitch and count only): a block
    # of 21 lattice rows of 18 pixels (21 × 18 = 378), rows 86.6 µm apart and every
    # other row shifted by half a pitch, which spans 1.85 × 1.85 mm and leaves a
    # 75 µm edge on each side of the 2 mm chip. Active fraction and trench are demo values.
    # No threshold: none was found published for it (the 3 mW/mm² of the clinical trials,
    # Wang et al. 2022, is an operating irradiance, not a threshold). No published
    # responsivity or diode count was found either: silicon limit and one diode per
    # pixel, an upper bound on the current (set diodes_in_series for a bipolar design).
    "human_100um": dict(
        pitch_um=100.0,
        layout="hex",
        outline="rectangle",
        rows=21,
        cols=18,
        active_shape="hexagon",
        active_fraction=0.6,
        trench_um=5.0,
        name="human_100um",
    ),
    # Vertical-junction photodiodes of Huang et al. (2021): 55 µm monopolar pixels, one
    # photodiode each, responsivity 0.51 A/W at 880 nm and a full-field threshold of
    # 0.057 ± 0.029 mW/mm² with 10 ms pulses (RCS rats, VEP), taken as the range mean ±
    # one SD, [0.028, 0.086]. Array size, active fraction and trench are demo values
    # (as for rat_55um); the threshold holds for 10 ms pulses (the source text says so).
    "rat_55um_vertical": dict(
        pitch_um=55.0,
        layout="hex",
        outline="hexagon",
        rings=11,
        active_shape="hexagon",
        active_fraction=0.6,
        trench_um=5.0,
        name="rat_55um_vertical",
        responsivity_a_per_w=HUANG_2021_RESPONSIVITY[0],
        diodes_in_series=1,
        threshold_mw_per_mm2=HUANG_2021[0],
        threshold_source=HUANG_2021[1],
    ),
}

#: Fields of a strength–duration threshold (a user's curve replaces a preset's range).
CURVE_KEYS = (
    "threshold_rheobase_mw_per_mm2",
    "threshold_chronaxie_ms",
    "threshold_law",
    "threshold_pulse_range_ms",
)


def implant_names() -> tuple[str, ...]:
    """Names of the implant presets."""
    return tuple(IMPLANT_PRESETS)


def implant_preset(name: str, **overrides: Any) -> Implant:
    """An implant preset, optionally with some fields replaced.

    Parameters
    ----------
    name : {"rat_55um", "human_100um", "rat_55um_vertical"}
        The preset.
    **overrides
        Any :class:`Implant` field, e.g. ``center_x_um=200.0``. Size fields
        replace the preset's sizing (``rings`` replaces ``diameter_um`` and
        vice versa); likewise ``active_diameter_um`` replaces
        ``active_fraction``, and ``threshold_mw_per_mm2`` or a strength–duration
        curve (``threshold_rheobase_mw_per_mm2``, ...) the preset's threshold and
        its source.

    Returns
    -------
    Implant
    """
    if name not in IMPLANT_PRESETS:
        raise ConfigError(
            "implant.preset", name, "one of " + ", ".join(repr(n) for n in IMPLANT_PRESETS)
        )
    known = {f.name for f in dataclasses.fields(Implant)}
    for k in overrides:
        if k not in known:
            raise ConfigError(f"implant.{k}", overrides[k], "a field of Implant")
    params = dict(IMPLANT_PRESETS[name])
    size_keys = {"diameter_um", "width_um", "height_um", "rows", "cols", "rings"}
    if size_keys & set(overrides):
        for k in size_keys:
            params.pop(k, None)
    if "active_diameter_um" in overrides:
        params.pop("active_fraction", None)
    if "active_fraction" in overrides:
        params.pop("active_diameter_um", None)
    if "threshold_mw_per_mm2" in overrides:  # a user's range does not take the preset's source
        params.pop("threshold_source", None)
        for k in CURVE_KEYS:
            params.pop(k, None)
    if set(CURVE_KEYS) & set(overrides):  # nor does a user's curve; it replaces the range
        params.pop("threshold_source", None)
        params.pop("threshold_mw_per_mm2", None)
    params.update(overrides)
    return Implant(**params)

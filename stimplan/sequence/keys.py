"""The keys of a sequence file, the format name and the size caps."""

from __future__ import annotations

import dataclasses
import re

from ..exposure import ProtocolCap
from ..implant import Implant
from ..optics.system import SLM, Illumination, Relay

__all__ = [
    "FORMAT",
    "MAX_FILE_BYTES",
    "MAX_FRAMES",
    "MAX_PULSES",
    "IRRADIANCE_BASES",
    "PARTNER_SUFFIXES",
    "MAX_LISTED_ERRORS",
    "MAX_DOTS_PER_LINE",
    "MAX_NESTING",
    "SEED_MAX",
    "NAME_RE",
    "PIECE_TOL_MS",
    "field_names",
    "TOP_KEYS",
    "OPTICS_KEYS",
    "SLM_KEYS",
    "LASER_KEYS",
    "RELAY_KEYS",
    "EYE_KEYS",
    "IMPLANT_KEYS",
    "IFTA_KEYS",
    "HOLOGRAM_KEYS",
    "MASK_KEYS",
    "LIMITS_KEYS",
    "ORDER_KEYS",
    "STEP_KEYS",
    "STEP_REQUIRED",
]


#: The value of the required ``format`` key.
FORMAT = "stimplan-sequence/1"


#: Largest sequence file accepted, bytes (1 MiB).
MAX_FILE_BYTES = 1 << 20


#: Largest number of frames of an expanded timeline.
MAX_FRAMES = 100_000


#: Largest number of light pulses of an expanded timeline.
MAX_PULSES = 10_000_000


#: How a target irradiance is read over the ON implant pixels.
IRRADIANCE_BASES = ("mean", "min")


#: Suffixes that name the partner of a stimulus (``"checks:reversed"``).
PARTNER_SUFFIXES = ("reversed", "inverted")


#: Most errors listed in one message (all are kept in ``SequenceError.errors``).
MAX_LISTED_ERRORS = 200


#: Most ``.`` outside strings on one line. Deeply dotted keys cost the TOML
#: reader time quadratic in their depth; no sequence needs more than a few.
MAX_DOTS_PER_LINE = 256


#: Deepest nesting of tables and arrays (the TOML reader and the stimulus builders
#: recurse once per level; no sequence needs more than a few).
MAX_NESTING = 32


SEED_MAX = 2**63 - 1


NAME_RE = re.compile(r"[A-Za-z0-9_-]+")


# Fraction of a period (or of a frame) below which a left-over piece is dropped
# as floating-point rounding rather than counted as one more pulse or frame.
PIECE_TOL_MS = 1e-9


def field_names(cls: type) -> tuple[str, ...]:
    return tuple(f.name for f in dataclasses.fields(cls))


TOP_KEYS = (
    "format",
    "title",
    "seed",
    "optics",
    "eye",
    "implant",
    "hologram",
    "mask",
    "limits",
    "order",
    "stimuli",
    "steps",
)


OPTICS_KEYS = ("slm", "laser", "relay")


SLM_KEYS = (*field_names(SLM), "bit_depth")


LASER_KEYS = field_names(Illumination)


RELAY_KEYS = field_names(Relay)


EYE_KEYS = ("preset", "um_per_deg", "focal_length_mm", "pupil_diameter_mm", "transmission", "name")


IMPLANT_KEYS = ("preset", *field_names(Implant))


IFTA_KEYS = (
    "method",
    "iterations",
    "mraf_mix",
    "initial",
    "quantized_iterations",
    "window_margin_samples",
    "group_gain",
)


HOLOGRAM_KEYS = (*IFTA_KEYS, "implant_aware", "oversample", "offset_um", "on_threshold")


MASK_KEYS = ("kind", "efficiency", "contrast_ratio", "field_width_um", "field_height_um")


LIMITS_KEYS = field_names(ProtocolCap)


ORDER_KEYS = ("shuffle", "repeats")


STEP_KEYS = (
    "stimulus",
    "alternate",
    "alternate_ms",
    "duration_ms",
    "pulse_ms",
    "rate_hz",
    "power_mw",
    "irradiance_mw_per_mm2",
    "irradiance_basis",
    "repeat",
    "blank_after_ms",
)


STEP_REQUIRED = ("duration_ms", "pulse_ms", "rate_hz")

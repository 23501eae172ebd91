"""The format name of a sequence file and its size caps (the keys: :mod:`.schema`)."""

from __future__ import annotations

import re

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

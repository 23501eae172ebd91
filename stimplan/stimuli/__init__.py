"""The stimulus library: patterns in retinal units, rendered with area sampling.

Every stimulus is a frozen dataclass with ``render(grid) -> float32 (rows,
cols)`` in [0, 1] and ``to_dict()``; :func:`stimulus_from_dict` builds one
from a kind name and keyword parameters.
"""

from .base import DEFAULT_SUPERSAMPLE, POLARITIES, Figure, Stimulus, levels_from_contrast
from .compose import Composite, Inverted, Masked, compose
from .gratings import Checkerboard, Grating
from .images import MAX_STIMULUS_IMAGE_PIXELS, ImageStimulus
from .optotypes import (
    E_ORIENTATIONS,
    LANDOLT_ORIENTATIONS,
    SLOAN_LETTERS,
    LandoltRing,
    Optotype,
    SloanLetter,
    TumblingE,
)
from .registry import from_dict, stimulus_from_dict, stimulus_kinds
from .shapes import Annulus, Bar, Blank, Flash, Spot

__all__ = [
    "DEFAULT_SUPERSAMPLE",
    "POLARITIES",
    "Stimulus",
    "Figure",
    "levels_from_contrast",
    "Grating",
    "Checkerboard",
    "Optotype",
    "LandoltRing",
    "TumblingE",
    "SloanLetter",
    "SLOAN_LETTERS",
    "LANDOLT_ORIENTATIONS",
    "E_ORIENTATIONS",
    "Spot",
    "Bar",
    "Annulus",
    "Flash",
    "Blank",
    "ImageStimulus",
    "MAX_STIMULUS_IMAGE_PIXELS",
    "Composite",
    "Inverted",
    "Masked",
    "compose",
    "stimulus_from_dict",
    "stimulus_kinds",
    "from_dict",
]

"""Optotypes: Landolt rings, tumbling E and the ten Sloan letters.

All three are drawn on a grid of 5 × 5 units, one unit being the stroke
width and the MAR (minimum angle of resolution) of the symbol:

* Landolt ring (ISO 8596): outer diameter 5, stroke 1, a gap of width 1 with
  parallel sides, in 8 orientations;
* tumbling E: 5 × 5, three bars and a spine of width 1, in 4 orientations;
* Sloan letters C D H K N O R S V Z: height = width = 5, stroke 1. The shapes
  here are our own drawing on that grid from rectangles, annular sectors and
  slanted strokes of perpendicular width 1; they are not a copy of any font.

Size is the height (5 units) in µm; :meth:`Optotype.from_logmar` and its
siblings convert logMAR, MAR in arcmin, Snellen fractions and decimal acuity
through an :class:`~stimplan.optics.system.Eye`.

References
----------
.. [1] ISO 8596, *Ophthalmic optics - Visual acuity testing - Standard and
   clinical optotypes and their presentation*.
.. [2] L. L. Sloan, "New test charts for the measurement of visual acuity at
   far and near distances", *Am. J. Ophthalmol.* 48, 807 (1959).
.. [3] NAS-NRC Committee on Vision, "Recommended standard procedures for the
   clinical measurement and specification of visual acuity", *Adv.
   Ophthalmol.* 41, 103 (1980).
.. [4] I. L. Bailey and J. E. Lovie, *Am. J. Optom. Physiol. Opt.* 53, 740
   (1976).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .. import validate
from ..acuity import (
    arcmin_to_um,
    mar_from_decimal,
    mar_from_logmar,
    mar_from_snellen,
    um_to_arcmin,
)
from ..errors import ConfigError
from ..optics.system import Eye
from .base import Figure, positive, register

__all__ = [
    "Optotype",
    "LandoltRing",
    "TumblingE",
    "SloanLetter",
    "SLOAN_LETTERS",
    "LANDOLT_ORIENTATIONS",
    "E_ORIENTATIONS",
]

#: Units per optotype height (ISO 8596; Sloan 5 × 5 grid).
UNITS = 5.0

LANDOLT_ORIENTATIONS: dict[str, float] = {
    "right": 0.0,
    "up_right": 45.0,
    "up": 90.0,
    "up_left": 135.0,
    "left": 180.0,
    "down_left": 225.0,
    "down": 270.0,
    "down_right": 315.0,
}
"""Gap direction of the Landolt ring: name -> angle from +x, counter-clockwise."""

E_ORIENTATIONS: dict[str, float] = {"right": 0.0, "up": 90.0, "left": 180.0, "down": 270.0}
"""Direction in which the bars of the tumbling E point."""

_SIZE_KEYS = ("height_um", "mar_arcmin", "logmar", "snellen", "decimal")


def _orientation(kind: str, value: Any, table: dict[str, float]) -> str:
    if isinstance(value, str) and value in table:
        return value
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        for name, ang in table.items():
            if float(value) % 360.0 == ang:
                return name
    raise ConfigError(
        f"{kind}.orientation",
        value,
        "one of " + ", ".join(f"{n!r} ({a:g}°)" for n, a in table.items()),
    )


def _rotate_into(u: np.ndarray, w: np.ndarray, deg: float) -> tuple[np.ndarray, np.ndarray]:
    """Coordinates in a frame rotated by ``deg`` (counter-clockwise)."""
    if deg == 0.0:
        return u, w
    c, s = math.cos(math.radians(deg)), math.sin(math.radians(deg))
    return u * c + w * s, -u * s + w * c


@dataclass(frozen=True, kw_only=True)
class Optotype(Figure):
    """Base of the optotypes: a 5 × 5-unit symbol of ``height_um``.

    Parameters
    ----------
    height_um : float
        Height of the symbol (5 units), µm, > 0. One unit (stroke, gap) is
        the MAR.
    """

    height_um: float

    def __post_init__(self) -> None:
        super().__post_init__()
        object.__setattr__(self, "height_um", positive(self.kind, "height_um", self.height_um))

    @property
    def unit_um(self) -> float:
        """Stroke width = gap = MAR on the retina, µm (``height / 5``)."""
        return self.height_um / UNITS

    def mar_arcmin(self, eye: Eye | float) -> float:
        """MAR of the symbol in arcmin for ``eye``."""

        return um_to_arcmin(self.unit_um, eye)

    def logmar(self, eye: Eye | float) -> float:
        """logMAR of the symbol for ``eye``."""
        return math.log10(self.mar_arcmin(eye))

    # -- sizing ------------------------------------------------------------------
    @classmethod
    def from_mar_arcmin(cls, mar_arcmin: float, eye: Eye | float, **kwargs: Any) -> Optotype:
        """The symbol whose stroke subtends ``mar_arcmin``."""
        mar = validate.number(f"{cls.kind}.mar_arcmin", mar_arcmin, lo=0, lo_open=True)
        return cls(height_um=UNITS * arcmin_to_um(mar, eye), **kwargs)

    @classmethod
    def from_logmar(cls, logmar: float, eye: Eye | float, **kwargs: Any) -> Optotype:
        """The symbol of a logMAR value (MAR = 10**logMAR arcmin)."""
        return cls.from_mar_arcmin(mar_from_logmar(logmar), eye, **kwargs)

    @classmethod
    def from_snellen(cls, snellen: Any, eye: Eye | float, **kwargs: Any) -> Optotype:
        """The symbol of a Snellen fraction (``"20/200"``, ``"6/60"``)."""
        return cls.from_mar_arcmin(mar_from_snellen(snellen), eye, **kwargs)

    @classmethod
    def from_decimal(cls, decimal: float, eye: Eye | float, **kwargs: Any) -> Optotype:
        """The symbol of a decimal acuity (MAR = 1/decimal arcmin)."""
        return cls.from_mar_arcmin(mar_from_decimal(decimal), eye, **kwargs)

    @classmethod
    def _alternatives(cls) -> tuple[str, ...]:
        return _SIZE_KEYS[1:]

    @classmethod
    def _build(cls, p: dict[str, Any], *, eye: Any, pitch_um: Any) -> Optotype:
        sizes = [k for k in _SIZE_KEYS if k in p]
        if len(sizes) != 1:
            raise ConfigError(
                f"{cls.kind}.height_um",
                p.get("height_um"),
                "exactly one size among " + ", ".join((*_SIZE_KEYS, "height_deg")),
            )
        key = sizes[0]
        if key == "height_um":
            return cls(**p)
        if eye is None:
            raise ConfigError(f"{cls.kind}.{key}", p[key], "an eye to convert the size to µm")
        value = p.pop(key)
        if key == "mar_arcmin":
            return cls.from_mar_arcmin(value, eye, **p)
        if key == "logmar":
            return cls.from_logmar(value, eye, **p)
        if key == "snellen":
            return cls.from_snellen(value, eye, **p)
        return cls.from_decimal(value, eye, **p)

    def _local_bbox(self) -> tuple[float, float, float, float]:
        h = self.height_um / 2.0
        return (-h, h, -h, h)

    def _units(self, u: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Grid coordinates: (0, 0) lower left, (5, 5) upper right."""
        k = 1.0 / self.unit_um
        return u * k + UNITS / 2.0, w * k + UNITS / 2.0


@register
@dataclass(frozen=True, kw_only=True)
class LandoltRing(Optotype):
    """A Landolt ring (ISO 8596).

    Outer diameter ``height_um`` (5 units), inner diameter 3 units, and a gap
    of width 1 unit with parallel sides.

    Parameters
    ----------
    height_um : float
        Outer diameter, µm.
    orientation : str or float
        Direction of the gap: ``"right"``, ``"up_right"``, ``"up"``,
        ``"up_left"``, ``"left"``, ``"down_left"``, ``"down"``,
        ``"down_right"``, or the angle 0, 45, ..., 315 degrees.

    References
    ----------
    .. [1] ISO 8596.
    """

    kind = "landolt"

    orientation: str = "right"

    def __post_init__(self) -> None:
        super().__post_init__()
        object.__setattr__(
            self, "orientation", _orientation(self.kind, self.orientation, LANDOLT_ORIENTATIONS)
        )

    @property
    def gap_deg(self) -> float:
        """Direction of the gap in the stimulus frame, degrees."""
        return LANDOLT_ORIENTATIONS[self.orientation]

    def _inside(self, u: np.ndarray, w: np.ndarray) -> np.ndarray:
        x, y = self._units(u, w)
        x, y = x - 2.5, y - 2.5
        r2 = x * x + y * y
        ring = (r2 <= 2.5**2) & (r2 >= 1.5**2)
        along, across = _rotate_into(x, y, self.gap_deg)
        gap = (along > 0.0) & (np.abs(across) < 0.5)
        return ring & ~gap


@register
@dataclass(frozen=True, kw_only=True)
class TumblingE(Optotype):
    """A tumbling E: 5 × 5 units, three bars and a spine, all 1 unit wide.

    Parameters
    ----------
    height_um : float
        Height (= width), µm.
    orientation : {"right", "up", "left", "down"} or float
        Direction in which the bars point (0, 90, 180, 270 degrees).
    """

    kind = "tumbling_e"

    orientation: str = "right"

    def __post_init__(self) -> None:
        super().__post_init__()
        object.__setattr__(
            self, "orientation", _orientation(self.kind, self.orientation, E_ORIENTATIONS)
        )

    def _inside(self, u: np.ndarray, w: np.ndarray) -> np.ndarray:
        uu, ww = _rotate_into(u, w, E_ORIENTATIONS[self.orientation])
        x, y = self._units(uu, ww)
        box = (x >= 0) & (x < 5) & (y >= 0) & (y < 5)
        spine = x < 1
        bars = (y < 1) | ((y >= 2) & (y < 3)) | (y >= 4)
        return box & (spine | bars)


# -- Sloan letters ------------------------------------------------------------------
# Primitives on the 5 x 5 grid (x right, y up, origin lower left):
#   ("rect", x0, x1, y0, y1)
#   ("arc", cx, cy, r_in, r_out, a0_deg, a1_deg)  annular sector, a0 < a1
#   ("poly", ((x, y), ...))                        convex, counter-clockwise


def _slanted(y0: float, x0: float, anchor0: float, y1: float, x1: float, anchor1: float):
    """A parallelogram stroke of perpendicular width 1 between rows ``y0 < y1``.

    Its horizontal edges lie on ``y0`` and ``y1``; ``anchor`` tells where the
    given x sits on that edge (0 = left end, 0.5 = middle, 1 = right end).
    The horizontal width ``w`` solves ``w = |d| / Δy`` for the direction
    ``d`` of the stroke, which makes the perpendicular width exactly 1.
    """
    dy = y1 - y0
    a = x1 - x0  # horizontal offset of the anchors
    b = anchor0 - anchor1  # left-end offset = a + b w
    # (dy² - b²) w² - 2 a b w - (a² + dy²) = 0
    qa, qb, qc = dy * dy - b * b, -2.0 * a * b, -(a * a + dy * dy)
    w = (-qb + math.sqrt(qb * qb - 4.0 * qa * qc)) / (2.0 * qa)
    left0 = x0 - anchor0 * w
    left1 = x1 - anchor1 * w
    return ("poly", ((left0, y0), (left0 + w, y0), (left1 + w, y1), (left1, y1)))


_FULL = (0.0, 360.0)

SLOAN_SHAPES: dict[str, tuple] = {
    "C": (("arc", 2.5, 2.5, 1.5, 2.5, *_FULL),),
    "D": (
        ("rect", 0, 1, 0, 5),
        ("rect", 0, 2.5, 4, 5),
        ("rect", 0, 2.5, 0, 1),
        ("arc", 2.5, 2.5, 1.5, 2.5, -90.0, 90.0),
    ),
    "H": (("rect", 0, 1, 0, 5), ("rect", 4, 5, 0, 5), ("rect", 1, 4, 2, 3)),
    "K": (
        ("rect", 0, 1, 0, 5),
        _slanted(1.5, 0.4, 0.0, 5.0, 5.0, 1.0),
        _slanted(0.0, 5.0, 1.0, 3.2, 1.9, 0.0),
    ),
    "N": (
        ("rect", 0, 1, 0, 5),
        ("rect", 4, 5, 0, 5),
        _slanted(0.0, 5.0, 1.0, 5.0, 0.0, 0.0),
    ),
    "O": (("arc", 2.5, 2.5, 1.5, 2.5, *_FULL),),
    "R": (
        ("rect", 0, 1, 0, 5),
        ("rect", 1, 3, 4, 5),
        ("rect", 1, 3, 2, 3),
        ("arc", 3.0, 3.5, 0.5, 1.5, -90.0, 90.0),
        _slanted(0.0, 5.0, 1.0, 2.5, 2.2, 0.0),
    ),
    "S": (
        ("rect", 1.5, 5, 4, 5),
        ("arc", 1.5, 3.5, 0.5, 1.5, 90.0, 270.0),
        ("rect", 1.5, 3.5, 2, 3),
        ("arc", 3.5, 1.5, 0.5, 1.5, -90.0, 90.0),
        ("rect", 0, 3.5, 0, 1),
    ),
    "V": (
        _slanted(0.0, 2.5, 0.5, 5.0, 0.0, 0.0),
        _slanted(0.0, 2.5, 0.5, 5.0, 5.0, 1.0),
    ),
    "Z": (
        ("rect", 0, 5, 4, 5),
        ("rect", 0, 5, 0, 1),
        _slanted(1.0, 0.0, 0.0, 4.0, 5.0, 1.0),
    ),
}
"""The Sloan letters as primitives on the 5 × 5 grid (our own drawing)."""

SLOAN_CUTS: dict[str, tuple] = {"C": (("rect", 2.5, 5.5, 2.0, 3.0),)}
"""Regions removed from a letter (the opening of the C: 1 unit high, parallel sides)."""

SLOAN_LETTERS = tuple(SLOAN_SHAPES)


def _inside_primitive(prim: tuple, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    kind = prim[0]
    if kind == "rect":
        _, x0, x1, y0, y1 = prim
        return (x >= x0) & (x < x1) & (y >= y0) & (y < y1)
    if kind == "arc":
        _, cx, cy, r0, r1, a0, a1 = prim
        dx, dy = x - cx, y - cy
        r2 = dx * dx + dy * dy
        ring = (r2 >= r0 * r0) & (r2 <= r1 * r1)
        if a1 - a0 >= 360.0:
            return ring
        ang = np.mod(np.degrees(np.arctan2(dy, dx)) - a0, 360.0)
        return ring & (ang <= a1 - a0)
    verts = prim[1]
    inside = np.ones(np.broadcast(x, y).shape, dtype=bool)
    n = len(verts)
    for k in range(n):
        (xa, ya), (xb, yb) = verts[k], verts[(k + 1) % n]
        inside &= (xb - xa) * (y - ya) - (yb - ya) * (x - xa) >= 0.0
    return inside


@register
@dataclass(frozen=True, kw_only=True)
class SloanLetter(Optotype):
    """One of the ten Sloan letters, on a 5 × 5 grid with strokes of 1 unit.

    Parameters
    ----------
    letter : {"C", "D", "H", "K", "N", "O", "R", "S", "V", "Z"}
        The letter (case-insensitive).
    height_um : float
        Letter height (= width), µm.

    References
    ----------
    .. [1] Sloan, *Am. J. Ophthalmol.* 48, 807 (1959).
    .. [2] NAS-NRC Committee on Vision, *Adv. Ophthalmol.* 41, 103 (1980).
    """

    kind = "letter"

    letter: str = "H"

    def __post_init__(self) -> None:
        super().__post_init__()
        value = self.letter.upper() if isinstance(self.letter, str) else self.letter
        if value not in SLOAN_SHAPES:
            raise ConfigError(
                "letter.letter", self.letter, "one of the Sloan letters " + " ".join(SLOAN_LETTERS)
            )
        object.__setattr__(self, "letter", value)

    def _inside(self, u: np.ndarray, w: np.ndarray) -> np.ndarray:
        x, y = self._units(u, w)
        box = (x >= 0) & (x <= 5) & (y >= 0) & (y <= 5)
        out = np.zeros(np.broadcast(x, y).shape, dtype=bool)
        for prim in SLOAN_SHAPES[self.letter]:
            out |= _inside_primitive(prim, x, y)
        for prim in SLOAN_CUTS.get(self.letter, ()):
            out &= ~_inside_primitive(prim, x, y)
        return out & box

"""Common machinery of the stimuli: levels, placement and anti-aliased rendering.

A stimulus is a small frozen dataclass in retinal units. ``render(grid)``
returns a float32 image ``(rows, cols)`` in [0, 1]: the relative irradiance
that the hologram should produce, 1 being the brightest level.

Figure stimuli (everything except the full-field flash, the blank and the
compositions) share

* ``contrast`` - Michelson contrast between figure and ground, in [0, 1]; the
  brighter of the two levels is 1 and the darker is ``(1 - c) / (1 + c)``;
* ``polarity`` - ``"bright"`` (figure brighter than the ground) or
  ``"dark"``;
* ``center_x_um``, ``center_y_um`` - position on the retina;
* ``rotation_deg`` - counter-clockwise rotation about the centre.

Rendering is anti-aliased by area sampling: each sample gets the fraction of
its square that the figure covers. Figures defined by an inside test are
evaluated at the sample centres and corners; samples whose corners and centre
disagree (those an edge crosses) are supersampled ``s × s`` (``s = 8`` by
default). A feature narrower than about half a sample can fall between the
test points and be missed; such a feature is below the grid's resolution.
Gratings and axis-aligned checkerboards use exact box averages instead.

References
----------
.. [1] A. A. Michelson, *Studies in Optics* (1927) (visibility / contrast).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar, Literal

import numpy as np

from .. import validate
from ..acuity import um_per_deg_of
from ..errors import ConfigError
from ..grid import RetinalGrid
from ..optics.system import Eye

__all__ = [
    "Stimulus",
    "Figure",
    "POLARITIES",
    "DEFAULT_SUPERSAMPLE",
    "register",
    "STIMULUS_KINDS",
    "levels_from_contrast",
    "check_grid",
    "positive",
    "as_given",
    "build_stimulus",
]

POLARITIES = ("bright", "dark")
DEFAULT_SUPERSAMPLE = 8
#: Largest number of sub-sample points evaluated at once.
_CHUNK_POINTS = 1 << 21

#: kind name -> class; filled by :func:`register`.
STIMULUS_KINDS: dict[str, type[Stimulus]] = {}

# Names of angles that stay in degrees when a sequence gives sizes in degrees.
_ANGLE_FIELDS = ("rotation_deg", "phase_deg")


def register(cls: type[Stimulus]) -> type[Stimulus]:
    """Class decorator: make ``cls`` available to ``stimulus_from_dict`` under ``cls.kind``."""
    STIMULUS_KINDS[cls.kind] = cls
    return cls


def levels_from_contrast(contrast: float, polarity: str) -> tuple[float, float]:
    """``(figure level, ground level)`` for a Michelson contrast and a polarity.

    The brighter level is 1 and the darker ``(1 - c) / (1 + c)``, so that
    ``(max - min) / (max + min) = c``.
    """
    c = validate.number("contrast", contrast, lo=0.0, hi=1.0)
    dark = (1.0 - c) / (1.0 + c)
    return (1.0, dark) if polarity == "bright" else (dark, 1.0)


def check_grid(grid: Any) -> RetinalGrid:
    if not isinstance(grid, RetinalGrid):
        raise ConfigError("grid", grid, "a RetinalGrid")
    return grid


@dataclass(frozen=True, kw_only=True)
class Stimulus:
    """Base class of all stimuli."""

    kind: ClassVar[str] = ""

    def render(self, grid: RetinalGrid) -> np.ndarray:
        """The stimulus on ``grid``: float32 ``(rows, cols)`` in [0, 1]."""
        raise NotImplementedError

    def to_dict(self) -> dict[str, Any]:
        """``{"kind": ..., **params}``; ``stimulus_from_dict`` rebuilds the stimulus."""
        out: dict[str, Any] = {"kind": self.kind}
        for f in dataclasses.fields(self):
            val = getattr(self, f.name)
            if isinstance(val, Stimulus):
                val = val.to_dict()
            elif isinstance(val, tuple) and val and isinstance(val[0], Stimulus):
                val = [s.to_dict() for s in val]
            elif hasattr(val, "to_dict"):
                val = val.to_dict()
            out[f.name] = val
        return out

    def inverted(self) -> Stimulus:
        """The complement ``1 - x``."""
        # the compositions register themselves as kinds: no import back up
        return STIMULUS_KINDS["inverted"](stimulus=self)

    def masked(self, implant: Any, *, region: str = "active") -> Stimulus:
        """This stimulus, zero outside an implant's active areas (or its footprint)."""
        return STIMULUS_KINDS["masked"](stimulus=self, implant=implant, region=region)

    # -- building from a sequence file --------------------------------------
    @classmethod
    def _field_names(cls) -> tuple[str, ...]:
        return tuple(f.name for f in dataclasses.fields(cls))

    @classmethod
    def _alternatives(cls) -> tuple[str, ...]:
        """Extra parameter names that :meth:`from_params` converts."""
        return ()

    @classmethod
    def from_params(
        cls,
        params: dict[str, Any],
        *,
        eye: Eye | float | None = None,
        pitch_um: float | None = None,
    ) -> Stimulus:
        """Build from keyword parameters, converting sizes given in degrees.

        Any ``<name>_deg`` whose ``<name>_um`` is a field (for instance
        ``diameter_deg``, ``period_deg``, ``center_x_deg``) is converted with
        the eye's µm per degree. Subclasses add their own alternatives
        (cycles/deg, logMAR, ...).
        """
        names = cls._field_names()
        p = dict(params)
        given: dict[str, tuple[str, Any]] = {}  # converted field -> (key written, value)
        for key in list(p):
            if key.endswith("_deg") and key not in _ANGLE_FIELDS and key not in names:
                target = key[: -len("_deg")] + "_um"
                if target in names:
                    if target in p:
                        raise ConfigError(
                            f"{cls.kind}.{key}", p[key], f"either {key} or {target}, not both"
                        )
                    deg = validate.number(f"{cls.kind}.{key}", p.pop(key))
                    p[target] = deg * _eye_scale(eye, f"{cls.kind}.{key}")
                    given[target] = (key, deg)
        allowed = set(names) | set(cls._alternatives())
        for key in p:
            if key not in allowed:
                raise ConfigError(
                    f"{cls.kind}.{key}",
                    p[key],
                    "a parameter among " + ", ".join(sorted(allowed)),
                    "sizes may also be given in degrees as <name>_deg",
                )
        try:
            return cls._build(p, eye=eye, pitch_um=pitch_um)
        except ConfigError as exc:
            for target, (key, value) in given.items():
                if exc.field == f"{cls.kind}.{target}":
                    raise as_given(exc, f"{cls.kind}.{key}", value) from None
            raise

    @classmethod
    def _build(cls, p: dict[str, Any], *, eye: Any, pitch_um: Any) -> Stimulus:
        return cls(**p)


def as_given(exc: ConfigError, field: str, value: Any) -> ConfigError:
    """The error of a derived value, re-named to the key the user wrote.

    A size given as ``diameter_deg`` (or a period as ``bar_width_px``) is checked
    as the µm value it converts to; the message names the key written, its value
    and the converted value with its allowed range.
    """
    shown = f"{exc.field} = {exc.value:g}" if isinstance(exc.value, float) else exc.field
    detail = f"it converts to {shown}"
    if exc.allowed:
        detail += f", allowed {exc.allowed}"
    if exc.detail:
        detail += f" ({exc.detail})"
    return ConfigError(field, value, "a value whose converted size is in range", detail)


def _eye_scale(eye: Eye | float | None, field: str) -> float:
    if eye is None:
        raise ConfigError(field, None, "an eye (µm per degree) to convert degrees to µm")
    return um_per_deg_of(eye, "eye")


@dataclass(frozen=True, kw_only=True)
class Figure(Stimulus):
    """A figure on a uniform ground, placed and rotated on the retina.

    Parameters
    ----------
    contrast : float
        Michelson contrast between figure and ground, in [0, 1].
    polarity : {"bright", "dark"}
        Figure brighter or darker than the ground.
    center_x_um, center_y_um : float
        Centre on the retina, µm.
    rotation_deg : float
        Counter-clockwise rotation about the centre, degrees.
    """

    contrast: float = 1.0
    polarity: Literal["bright", "dark"] = "bright"
    center_x_um: float = 0.0
    center_y_um: float = 0.0
    rotation_deg: float = 0.0

    def __post_init__(self) -> None:
        k = self.kind
        f = object.__setattr__
        f(self, "contrast", validate.number(f"{k}.contrast", self.contrast, lo=0.0, hi=1.0))
        f(self, "polarity", validate.choice(f"{k}.polarity", self.polarity, POLARITIES))
        for name in ("center_x_um", "center_y_um"):
            f(
                self,
                name,
                validate.physical(f"{k}.{name}", getattr(self, name), "retinal_position_um"),
            )
        f(
            self,
            "rotation_deg",
            validate.physical(f"{k}.rotation_deg", self.rotation_deg, "angle_deg"),
        )

    # -- levels ---------------------------------------------------------------
    @property
    def levels(self) -> tuple[float, float]:
        """``(figure level, ground level)``."""
        return levels_from_contrast(self.contrast, self.polarity)

    def render(self, grid: RetinalGrid, *, supersample: int = DEFAULT_SUPERSAMPLE) -> np.ndarray:
        """The stimulus on ``grid``: float32 ``(rows, cols)`` in [0, 1].

        Parameters
        ----------
        grid : RetinalGrid
        supersample : int
            Sub-samples per axis for samples that an edge crosses (even
            values put an edge through a sample centre at exactly 0.5).
        """
        cov = self.coverage(grid, supersample=supersample)
        fig, ground = self.levels
        if fig == 1.0 and ground == 0.0:
            return cov
        out = cov * np.float32(fig - ground)
        out += np.float32(ground)
        return np.clip(out, 0.0, 1.0, out=out)

    def coverage(self, grid: RetinalGrid, *, supersample: int = DEFAULT_SUPERSAMPLE) -> np.ndarray:
        """Fraction of each sample covered by the figure, float32 in [0, 1]."""
        grid = check_grid(grid)
        s = validate.integer("supersample", supersample, lo=1, hi=32)
        return self._adaptive_coverage(grid, s)

    # -- geometry, for subclasses -------------------------------------------------
    def _inside(self, u: np.ndarray, v_: np.ndarray) -> np.ndarray:
        """Inside test in the figure's own frame (µm, before rotation and shift)."""
        raise NotImplementedError

    def _local_bbox(self) -> tuple[float, float, float, float] | None:
        """``(u_min, u_max, v_min, v_max)`` of the figure in its frame, or None if unbounded."""
        return None

    def _to_local(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        dx = x - self.center_x_um
        dy = y - self.center_y_um
        if self.rotation_deg % 360.0 == 0.0:
            return dx, dy
        c = math.cos(math.radians(self.rotation_deg))
        s = math.sin(math.radians(self.rotation_deg))
        return dx * c + dy * s, -dx * s + dy * c

    def _inside_world(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        u, w = self._to_local(x, y)
        return self._inside(u, w)

    def _window(self, grid: RetinalGrid) -> tuple[int, int, int, int] | None:
        """Row and column range ``(r0, r1, c0, c1)`` that holds the figure."""
        bbox = self._local_bbox()
        if bbox is None:
            return 0, grid.rows, 0, grid.cols
        u0, u1, w0, w1 = bbox
        c = math.cos(math.radians(self.rotation_deg))
        s = math.sin(math.radians(self.rotation_deg))
        us = np.array([u0, u1, u1, u0])
        ws = np.array([w0, w0, w1, w1])
        xs = self.center_x_um + us * c - ws * s
        ys = self.center_y_um + us * s + ws * c
        px, py = grid.pitch_x_um, grid.pitch_y_um
        ex0 = grid.x_um[0] - px / 2.0
        ey0 = grid.y_um[0] + py / 2.0
        c0 = max(0, int(math.floor((xs.min() - ex0) / px)) - 1)
        c1 = min(grid.cols, int(math.ceil((xs.max() - ex0) / px)) + 1)
        r0 = max(0, int(math.floor((ey0 - ys.max()) / py)) - 1)
        r1 = min(grid.rows, int(math.ceil((ey0 - ys.min()) / py)) + 1)
        if c1 <= c0 or r1 <= r0:
            return None
        return r0, r1, c0, c1

    def _adaptive_coverage(self, grid: RetinalGrid, s: int) -> np.ndarray:
        out = np.zeros(grid.shape, dtype=np.float32)
        win = self._window(grid)
        if win is None:
            return out
        r0, r1, c0, c1 = win
        px, py = grid.pitch_x_um, grid.pitch_y_um
        xs = grid.x_um[c0:c1]
        ys = grid.y_um[r0:r1]
        xe = np.append(xs - px / 2.0, xs[-1] + px / 2.0)
        ye = np.append(ys + py / 2.0, ys[-1] - py / 2.0)
        corner = self._inside_world(xe[np.newaxis, :], ye[:, np.newaxis])
        centre = self._inside_world(xs[np.newaxis, :], ys[:, np.newaxis])
        corner = np.broadcast_to(corner, (len(ye), len(xe)))
        centre = np.broadcast_to(centre, (len(ys), len(xs)))
        n_in = corner[:-1, :-1].astype(np.int8) + corner[:-1, 1:] + corner[1:, :-1] + corner[1:, 1:]
        mixed = ((n_in > 0) & (n_in < 4)) | (centre != corner[:-1, :-1])
        # A corner of the figure can poke into a sample between its test
        # points; the edges leading to it cross the neighbours, so the
        # neighbours of every mixed sample are supersampled as well.
        mixed = _dilate(mixed)
        cov = centre.astype(np.float32)
        rr, cc = np.nonzero(mixed)
        if rr.size:
            # sub-sample offsets; float32 keeps the passes light (1e-4 µm at 1 mm)
            off = (np.arange(s) + 0.5) / s - 0.5
            ox = np.tile(off * px, s).astype(np.float32)
            oy = np.repeat(off * py, s).astype(np.float32)
            xs32, ys32 = xs.astype(np.float32), ys.astype(np.float32)
            step = max(1, _CHUNK_POINTS // (s * s))
            for a in range(0, rr.size, step):
                r, c = rr[a : a + step], cc[a : a + step]
                X = xs32[c][:, np.newaxis] + ox
                Y = ys32[r][:, np.newaxis] + oy
                inside = self._inside_world(X, Y)
                cov[r, c] = np.count_nonzero(inside, axis=1) / np.float32(s * s)
        out[r0:r1, c0:c1] = cov
        return out


def _dilate(mask: np.ndarray) -> np.ndarray:
    """Binary dilation with a 3 × 3 square."""
    out = mask.copy()
    out[1:, :] |= mask[:-1, :]
    out[:-1, :] |= mask[1:, :]
    rows = out.copy()
    out[:, 1:] |= rows[:, :-1]
    out[:, :-1] |= rows[:, 1:]
    return out


def positive(kind: str, name: str, value: Any) -> float:
    """A retinal length in µm: positive and within its plausibility range (``kind.name``)."""
    return validate.physical(f"{kind}.{name}", value, "retinal_length_um")


def build_stimulus(
    kind: str,
    params: Mapping[str, Any] | None = None,
    *,
    eye: Any = None,
    pitch_um: float | None = None,
) -> Stimulus:
    """A stimulus of a registered ``kind`` from keyword parameters (see
    :func:`stimplan.stimuli.stimulus_from_dict`, which registers every kind first)."""
    if not isinstance(kind, str) or kind not in STIMULUS_KINDS:
        raise ConfigError("stimulus.kind", kind, "one of " + ", ".join(STIMULUS_KINDS))
    if params is None:
        params = {}
    if not isinstance(params, Mapping):
        raise ConfigError(f"{kind}", params, "a table of keyword parameters")
    cls = STIMULUS_KINDS[kind]
    try:
        return cls.from_params(dict(params), eye=eye, pitch_um=pitch_um)
    except TypeError as exc:  # a required parameter is missing
        required = [
            f.name
            for f in dataclasses.fields(cls)
            if f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING
        ]
        missing = [k for k in required if k not in params]
        raise ConfigError(
            f"{kind}.{missing[0] if missing else 'parameters'}",
            None,
            "the parameters " + ", ".join(required) if required else "valid parameters",
            str(exc),
        ) from None

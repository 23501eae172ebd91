"""The checks of an implant's fields: the choices, the sizing of its outline, the photodiode."""

from __future__ import annotations

from typing import Any

import numpy as np

from .. import validate
from ..errors import ConfigError
from .geometry import centred_hexagonal_number
from .lattice import outline_half_extent_um
from .photodiode import check_diodes_in_series
from .strength_duration import StrengthDuration
from .threshold import check_threshold

__all__ = [
    "check_fields",
    "LAYOUTS",
    "OUTLINES",
    "ACTIVE_SHAPES",
    "INCLUSIONS",
    "REGIONS",
    "MAX_IMPLANT_PIXELS",
    "size_text",
    "check_size",
    "check_active",
    "check_response",
    "cell_normals",
    "active_support_um",
]

LAYOUTS = ("hex", "square")


OUTLINES = ("hexagon", "circle", "square", "rectangle")


ACTIVE_SHAPES = ("hexagon", "circle", "square")


INCLUSIONS = ("center", "cell")


REGIONS = ("active", "cell")


#: Largest number of lattice pixels an implant may have.
MAX_IMPLANT_PIXELS = 200_000


# -- validation ----------------------------------------------------------
def size_text(implant: Any) -> str:
    """The sizing fields that are set, for messages."""
    parts = []
    for k in ("diameter_um", "width_um", "height_um", "rows", "cols", "rings"):
        if getattr(implant, k) is not None:
            parts.append(f"{k}={getattr(implant, k)}")
    return f"{implant.outline} outline, " + ", ".join(parts)


def check_size(implant: Any) -> None:
    """Check the outline's sizing fields (and store them validated); bound the pixel count."""
    f = object.__setattr__
    given = {
        k: getattr(implant, k)
        for k in ("diameter_um", "width_um", "height_um", "rows", "cols", "rings")
        if getattr(implant, k) is not None
    }
    uses_block = "rows" in given or "cols" in given
    if implant.outline == "hexagon":
        need = {"rings"} if "rings" in given else {"diameter_um"}
    elif implant.outline == "circle":
        need = {"diameter_um"}
    elif implant.outline == "square":
        need = {"rows", "cols"} if uses_block else {"width_um"}
    else:
        need = {"rows", "cols"} if uses_block else {"width_um", "height_um"}
    extra = set(given) - need
    missing = need - set(given)
    if missing or extra:
        options = {
            "hexagon": "diameter_um (corner to corner) or rings",
            "circle": "diameter_um",
            "square": "width_um, or rows and cols",
            "rectangle": "width_um and height_um, or rows and cols",
        }[implant.outline]
        bad = sorted(missing or extra)[0]
        raise ConfigError(
            f"implant.{bad}",
            given.get(bad),
            f"a {implant.outline} outline is sized by {options}",
            "missing" if missing else "not used with this outline",
        )
    for k in ("diameter_um", "width_um", "height_um"):
        if k in given:
            f(implant, k, validate.physical(f"implant.{k}", given[k], "retinal_length_um"))
    for k in ("rows", "cols"):
        if k in given:
            f(implant, k, validate.integer(f"implant.{k}", given[k], lo=1, hi=MAX_IMPLANT_PIXELS))
    if "rings" in given:
        f(implant, "rings", validate.integer("implant.rings", given["rings"], lo=0, hi=250))
        if implant.layout != "hex":
            raise ConfigError("implant.rings", implant.rings, "only with layout 'hex'")
    if implant.outline == "square" and implant.rows is not None and implant.rows != implant.cols:
        raise ConfigError(
            "implant.cols", implant.cols, f"equal to rows ({implant.rows}) for a square outline"
        )
    # bound the lattice size before building it
    cell = implant.cell_area_um2
    if implant.rows is not None:
        count = implant.rows * implant.cols
    elif implant.rings is not None:
        count = centred_hexagonal_number(implant.rings)
    else:
        w, h = outline_half_extent_um(implant)
        count = int(4 * (w + implant.pitch_um) * (h + implant.pitch_um) / cell)
    if count > MAX_IMPLANT_PIXELS:
        raise ConfigError(
            "implant",
            size_text(implant),
            f"at most {MAX_IMPLANT_PIXELS} pixels",
            f"about {count} pixels of pitch {implant.pitch_um:g} µm",
        )


def check_active(implant: Any) -> None:
    """Check the photodiode size: exactly one of fraction or diameter, and it fits the cell."""
    f = object.__setattr__
    frac, diam = implant.active_fraction, implant.active_diameter_um
    if (frac is None) == (diam is None):
        raise ConfigError(
            "implant.active_fraction",
            frac,
            "in (0, 1], or give active_diameter_um instead (exactly one of the two)",
        )
    if frac is not None:
        frac = validate.number("implant.active_fraction", frac, lo=0, hi=1, lo_open=True)
        f(implant, "active_fraction", frac)
        field, value = "implant.active_fraction", frac
    else:
        diam = validate.number("implant.active_diameter_um", diam, lo=0, lo_open=True)
        f(implant, "active_diameter_um", diam)
        field, value = "implant.active_diameter_um", diam
    # does the photodiode fit inside the cell minus the trench?
    inset = 0.5 * (implant.pitch_um - implant.trench_um)
    normals = cell_normals(implant)
    support = active_support_um(implant, normals)
    ratio = float(np.min(inset / support))
    if ratio < 1.0 - 1e-9:
        top = value * ratio**2 if frac is not None else value * ratio
        raise ConfigError(
            field,
            value,
            f"<= {top:.4g}" if frac is None else f"in (0, {top:.4g}]",
            f"a {implant.active_shape} photodiode must fit inside the {implant.layout} cell of "
            f"pitch {implant.pitch_um:g} µm minus a {implant.trench_um:g} µm trench",
        )


def check_response(implant: Any) -> None:
    """Check the responsivity, the diodes in series and the strength–duration fields
    (storing the validated values)."""
    f = object.__setattr__
    r = implant.responsivity_a_per_w
    if r is not None:
        r = validate.physical("implant.responsivity_a_per_w", r, "responsivity_a_per_w")
        f(implant, "responsivity_a_per_w", r)
    f(implant, "diodes_in_series", check_diodes_in_series(implant.diodes_in_series))
    rheo, chron = implant.threshold_rheobase_mw_per_mm2, implant.threshold_chronaxie_ms
    if rheo is None:
        for key in ("threshold_chronaxie_ms", "threshold_law", "threshold_pulse_range_ms"):
            if getattr(implant, key) is not None:
                raise ConfigError(
                    f"implant.{key}",
                    getattr(implant, key),
                    "only with threshold_rheobase_mw_per_mm2 (a strength–duration curve)",
                )
        return
    if chron is None:
        raise ConfigError(
            "implant.threshold_chronaxie_ms",
            None,
            "a chronaxie (ms) with threshold_rheobase_mw_per_mm2",
            "a strength–duration curve needs both",
        )
    curve = StrengthDuration(
        rheobase_mw_per_mm2=rheo,
        chronaxie_ms=chron,
        law=implant.threshold_law or "weiss",
        pulse_range_ms=implant.threshold_pulse_range_ms,
    )
    f(implant, "threshold_rheobase_mw_per_mm2", curve.rheobase_mw_per_mm2)
    f(implant, "threshold_chronaxie_ms", curve.chronaxie_ms)
    if implant.threshold_law is not None:
        f(implant, "threshold_law", curve.law)
    f(implant, "threshold_pulse_range_ms", curve.pulse_range_ms)


# -- geometry of one pixel (array frame, before rotation) ------------------


def cell_normals(implant: Any) -> np.ndarray:
    """Unit normals of the cell's sides (6 for hex, 4 for square)."""
    deg = np.arange(0, 360, 60) if implant.layout == "hex" else np.arange(0, 360, 90)
    rad = np.deg2rad(deg)
    return np.stack([np.cos(rad), np.sin(rad)], axis=1)


def active_support_um(implant: Any, normals: np.ndarray) -> np.ndarray:
    """Support function of the photodiode along ``normals``, µm."""
    s = implant.active_size_um
    if implant.active_shape == "circle":
        return np.full(len(normals), s / 2.0)
    verts = implant.polygon_local_um("active")
    return np.max(normals @ verts.T, axis=1)


def check_fields(implant: Any) -> None:
    """Check every field of an implant (storing the validated values); raise ConfigError."""
    f = object.__setattr__
    pitch = validate.physical("implant.pitch_um", implant.pitch_um, "implant_pitch_um")
    f(implant, "pitch_um", pitch)
    f(implant, "layout", validate.choice("implant.layout", implant.layout, LAYOUTS))
    f(implant, "outline", validate.choice("implant.outline", implant.outline, OUTLINES))
    f(
        implant,
        "pixel_inclusion",
        validate.choice("implant.pixel_inclusion", implant.pixel_inclusion, INCLUSIONS),
    )
    f(
        implant,
        "active_shape",
        validate.choice("implant.active_shape", implant.active_shape, ACTIVE_SHAPES),
    )
    f(
        implant,
        "trench_um",
        validate.number("implant.trench_um", implant.trench_um, lo=0.0, hi=pitch, hi_open=True),
    )
    for name in ("center_x_um", "center_y_um"):
        value = getattr(implant, name)
        f(implant, name, validate.physical(f"implant.{name}", value, "retinal_position_um"))
    f(
        implant,
        "rotation_deg",
        validate.physical("implant.rotation_deg", implant.rotation_deg, "angle_deg"),
    )
    check_response(implant)
    pair, source = check_threshold(
        implant.threshold_mw_per_mm2,
        implant.threshold_source,
        has_curve=implant.threshold_rheobase_mw_per_mm2 is not None,
    )
    f(implant, "threshold_mw_per_mm2", pair)
    f(implant, "threshold_source", source)
    if not isinstance(implant.name, str):
        raise ConfigError("implant.name", implant.name, "a string")
    check_size(implant)
    check_active(implant)
    n = implant.n_pixels
    if n == 0:
        raise ConfigError(
            "implant",
            size_text(implant),
            "an outline that holds at least one pixel",
            f"pitch {pitch:g} µm",
        )

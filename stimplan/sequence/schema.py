"""The keys of a sequence file and the type of each value: the schema.

Every table of the file is a pydantic model that forbids unknown keys
(``extra="forbid"``) and takes no string for a number (``strict``). One
pass of :func:`schema_errors` finds every unknown key, missing key and value
of the wrong type at once, each with its key path; the file's line is added
by the caller (:class:`~stimplan.sequence.report.ErrorReport`). The ranges
of the values are not here: they belong to the objects that the values
build (``stimplan.ranges``, checked by each dataclass), and the rules
between keys of one step (either ``power_mw`` or ``irradiance_mw_per_mm2``)
to :mod:`stimplan.sequence.sections`.

A value that the schema refuses is left out when the section is built, so
that it is reported once.

References
----------
.. [1] pydantic v2 documentation, "Models" (``extra="forbid"``), "Strict
   Mode" and "Error Handling" (``ValidationError.errors()``: ``type``,
   ``loc``, ``input``), https://docs.pydantic.dev/latest/.
.. [2] TOML v1.0.0, https://toml.io/en/v1.0.0 (tables, arrays of tables).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, Literal, get_args, get_origin

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from ..optics.eye import EYE_PRESETS
from ..stimuli.base import STIMULUS_KINDS
from .keys import FORMAT

__all__ = [
    "SequenceFile",
    "SlmTable",
    "LaserTable",
    "RelayTable",
    "OpticsTable",
    "EyeTable",
    "ImplantTable",
    "HologramTable",
    "MaskTable",
    "LimitsTable",
    "OrderTable",
    "TimingTable",
    "StimulusTable",
    "StepTable",
    "IFTA_KEYS",
    "keys_of",
    "SchemaIssue",
    "schema_errors",
]


class _Table(BaseModel):
    """A table of the file: unknown keys refused, no coercion of strings to numbers."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


# Whole numbers: a float with an integral value passes here (as it does in
# ``stimplan.validate.integer``); 2.5 or "3" do not.
_WHOLE = Field(default=None, strict=False)


class SlmTable(_Table):
    """``[optics.slm]``: the phase modulator (:class:`stimplan.optics.system.SLM`)."""

    pixels_x: int | None = _WHOLE
    pixels_y: int | None = _WHOLE
    pitch_um: float | None = None
    fill_factor: float | None = None
    phase_levels: int | None = _WHOLE
    bit_depth: int | None = _WHOLE
    grey_2pi: int | None = _WHOLE
    lut_file: str | None = None
    zero_order_fraction: float | None = None
    zero_order_incoherent_share: float | None = None
    fringing_um: float | None = None
    fringing_samples: int | None = _WHOLE
    reflectance: float | None = None


class LaserTable(_Table):
    """``[optics.laser]``: the illumination (:class:`stimplan.optics.system.Illumination`)."""

    wavelength_nm: float | None = None
    power_mw: float | None = None
    profile: str | None = None
    waist_mm: float | None = None
    amplitude_file: str | None = None
    correction_phase_file: str | None = None
    degree_of_polarisation: float | None = None
    polarisation_angle_deg: float | None = None
    m_squared: float | None = None
    fibre_core_um: float | None = None
    fibre_na: float | None = None


class RelayTable(_Table):
    """``[optics.relay]``: the relay to the eye (:class:`stimplan.optics.system.Relay`)."""

    magnification: float | None = None
    fresnel_focal_mm: float | None = None
    transmission: float | None = None


class OpticsTable(_Table):
    """``[optics]``."""

    slm: SlmTable | None = None
    laser: LaserTable | None = None
    relay: RelayTable | None = None


class EyeTable(_Table):
    """``[eye]``: a preset, or the retinal scale (:class:`stimplan.optics.system.Eye`)."""

    preset: str | None = None
    um_per_deg: float | None = None
    focal_length_mm: float | None = None
    pupil_diameter_mm: float | None = None
    transmission: float | None = None
    transmission_basis: str | None = None
    name: str | None = None


class ImplantTable(_Table):
    """``[implant]``: a preset, or the array's fields (:class:`stimplan.implant.Implant`)."""

    preset: str | None = None
    pitch_um: float | None = None
    layout: str | None = None
    outline: str | None = None
    diameter_um: float | None = None
    width_um: float | None = None
    height_um: float | None = None
    rows: int | None = _WHOLE
    cols: int | None = _WHOLE
    rings: int | None = _WHOLE
    pixel_inclusion: str | None = None
    active_shape: str | None = None
    active_fraction: float | None = None
    active_diameter_um: float | None = None
    trench_um: float | None = None
    center_x_um: float | None = None
    center_y_um: float | None = None
    rotation_deg: float | None = None
    name: str | None = None
    threshold_mw_per_mm2: Any = None  # a pair [low, high]; each element checked with its index
    threshold_source: str | None = None
    responsivity_a_per_w: float | None = None
    diodes_in_series: int | None = _WHOLE
    threshold_rheobase_mw_per_mm2: float | None = None
    threshold_chronaxie_ms: float | None = None
    threshold_law: str | None = None
    threshold_pulse_range_ms: Any = None  # a pair [shortest, longest]; checked with its index


#: The keys of ``[hologram]`` that set the phase retrieval
#: (:class:`stimplan.holography.ifta.IftaSettings`).
IFTA_KEYS = (
    "method",
    "iterations",
    "mraf_mix",
    "initial",
    "quantized_iterations",
    "window_margin_samples",
    "group_gain",
)


class HologramTable(_Table):
    """``[hologram]``: the phase retrieval and the hologram's placement."""

    method: str | None = None
    iterations: int | None = _WHOLE
    mraf_mix: float | None = None
    initial: str | None = None
    quantized_iterations: int | None = _WHOLE
    window_margin_samples: int | None = _WHOLE
    group_gain: float | None = None
    implant_aware: bool | None = None
    oversample: int | None = _WHOLE
    offset_um: Any = None  # a pair; each element is checked with its index
    on_threshold: float | None = None


class MaskTable(_Table):
    """``[mask]``: the amplitude-mask projector compared against."""

    kind: str | None = None
    efficiency: float | None = None
    contrast_ratio: float | None = None
    field_width_um: float | None = None
    field_height_um: float | None = None


class LimitsTable(_Table):
    """``[limits]``: a protocol's own irradiance cap (:class:`stimplan.exposure.ProtocolCap`)."""

    peak_irradiance_mw_per_mm2: float | None = None
    mean_irradiance_mw_per_mm2: float | None = None
    name: str | None = None
    source: str | None = None


class ToleranceTable(_Table):
    """``[tolerance]``: the ranges of a tolerance analysis
    (:class:`stimplan.tolerance.ToleranceRanges`) and the robust design."""

    defocus_d: Any = None  # a half-width or a pair; checked by ToleranceRanges
    cylinder_d: float | None = None
    depth_um: Any = None  # a half-width or a pair
    shift_um: float | None = None
    magnification_error: float | None = None
    robust_design: bool | None = None


class OrderTable(_Table):
    """``[order]``: file order, shuffled steps or interleaved trials; whole-sequence repeats."""

    shuffle: bool | None = None
    interleave: bool | None = None
    repeats: int | None = _WHOLE


class TimingTable(_Table):
    """``[timing]``: the hardware timing (:class:`stimplan.sequence.timing.TimingSpec`)."""

    slm_settle_ms: float | None = None
    jitter_ms: float | None = None
    allow_truncated_pulses: bool | None = None


class StimulusTable(BaseModel):
    """``[stimuli.<name>]``: a kind and that kind's own keys (checked by the stimulus)."""

    model_config = ConfigDict(extra="allow", strict=True, frozen=True)

    kind: str = Field(description="one of the stimulus kinds")


_GIVEN = "a number > 0"


class StepTable(_Table):
    """``[[steps]]``: one step of the timeline (:class:`stimplan.sequence.model.StepSpec`)."""

    stimulus: str | None = None
    alternate: Any = None  # a pair of names; each is checked with its index
    alternate_ms: float | None = None
    duration_ms: float = Field(description=_GIVEN)
    pulse_ms: float = Field(description=_GIVEN)
    rate_hz: float = Field(description=_GIVEN)
    power_mw: float | None = None
    irradiance_mw_per_mm2: float | None = None
    irradiance_basis: str | None = None
    repeat: int | None = _WHOLE
    blank_after_ms: float | None = None
    pulse_delay_ms: float | None = None


class SequenceFile(_Table):
    """A whole sequence file (``format = "stimplan-sequence/1"``)."""

    format: Literal["stimplan-sequence/1"] = Field(description=repr(FORMAT))
    title: str | None = None
    seed: int | None = _WHOLE
    optics: OpticsTable | None = None
    eye: EyeTable = Field(
        description="a table with preset = "
        + " | ".join(map(repr, EYE_PRESETS))
        + " or um_per_deg",
    )
    implant: ImplantTable | None = None
    hologram: HologramTable | None = None
    mask: MaskTable | None = None
    limits: LimitsTable | None = None
    tolerance: ToleranceTable | None = None
    order: OrderTable | None = None
    timing: TimingTable | None = None
    stimuli: dict[str, StimulusTable] = Field(
        description="a [stimuli.<name>] table for each stimulus",
    )
    steps: list[StepTable] = Field(
        min_length=1, description="one [[steps]] table or more (an array of tables)"
    )


def keys_of(model: type[BaseModel]) -> tuple[str, ...]:
    """The keys a table takes, in the order of the schema."""
    return tuple(model.model_fields)


class SchemaIssue:
    """One problem the schema found: key path parts, value, what is allowed, detail."""

    __slots__ = ("parts", "value", "allowed", "detail")

    def __init__(self, parts: tuple[Any, ...], value: Any, allowed: str, detail: str) -> None:
        self.parts, self.value, self.allowed, self.detail = parts, value, allowed, detail


_TYPE_WORDS = {
    "float_type": "a number",
    "int_type": "a whole number",
    "int_from_float": "a whole number",
    "int_parsing": "a whole number",
    "string_type": "a string",
    "bool_type": "true or false",
    "model_type": "a table",
    "model_attributes_type": "a table",
    "invalid_key": "a key name (a string)",
    "dict_type": "a table",
    "list_type": "an array",
}


def _model_at(parts: tuple[Any, ...]) -> type[BaseModel] | None:
    """The model of the table that holds the key ``parts[-1]`` (``None`` if none does)."""
    model: type[BaseModel] | None = SequenceFile
    skip = False
    for p in parts[:-1]:
        if skip:  # an index of an array of tables, or a name under [stimuli]
            skip = False
            continue
        field = model.model_fields.get(p) if model is not None and isinstance(p, str) else None
        if field is None:
            return None
        model, skip = _table_of(field.annotation)
    return model


def _table_of(annotation: Any) -> tuple[type[BaseModel] | None, bool]:
    """The table model in ``X``, ``X | None``, ``list[X]`` or ``dict[str, X]``.

    The flag says whether the next part of a key path is an index or a name.
    """
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation, False
    keyed = get_origin(annotation) in (list, dict)
    for arg in get_args(annotation):
        if isinstance(arg, type) and issubclass(arg, BaseModel):
            return arg, keyed
    return None, False


def _describe(parts: tuple[Any, ...], kind: str, value: Any) -> tuple[str, str]:
    """What is allowed, and the detail, for one pydantic error."""
    model = _model_at(parts)
    field = model.model_fields.get(parts[-1]) if model is not None and parts else None
    said = field.description if field is not None else None
    if kind == "extra_forbidden":
        keys = keys_of(model) if model is not None else ()
        return "a key among " + ", ".join(keys), "unknown key"
    if parts[:1] == ("stimuli",) and len(parts) == 3 and parts[-1] == "kind":
        said = "one of " + ", ".join(STIMULUS_KINDS)
    if kind == "missing" or (value is None and kind.endswith("_type")):
        return said or "a value", "missing"
    if kind == "literal_error":
        return said or "one of the listed values", "unknown value"
    if kind == "too_short":
        return said or "at least one item", "empty"
    if parts and isinstance(parts[-1], int) and kind in ("model_type", "dict_type"):
        return f"a [[{parts[-2]}]] table" if len(parts) > 1 else "a table", ""
    if said and kind in ("model_type", "dict_type", "list_type"):
        return said, ""
    if parts and parts[0] == "stimuli" and len(parts) == 2 and kind in ("model_type", "dict_type"):
        return "a table with kind = <one of the stimulus kinds>", ""
    return _TYPE_WORDS.get(kind, "a valid value"), ""


def schema_errors(raw: Mapping[str, Any]) -> list[SchemaIssue]:
    """Every unknown key, missing key and mistyped value of a sequence, at once.

    Parameters
    ----------
    raw : mapping
        The file as read by :mod:`tomllib` (or the same layout as dicts).

    Returns
    -------
    list of SchemaIssue
        In the order pydantic reports them (the order of the schema), each
        with its key path as parts (strings are keys, integers indices).
    """
    try:
        SequenceFile.model_validate(dict(raw))
    except ValidationError as exc:
        out = []
        for err in exc.errors(include_url=False):
            parts = tuple(err["loc"])
            value = err.get("input")
            allowed, detail = _describe(parts, err["type"], value)
            out.append(
                SchemaIssue(parts, None if err["type"] == "missing" else value, allowed, detail)
            )
        return out
    return []

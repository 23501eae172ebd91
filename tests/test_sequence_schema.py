"""The schema of the sequence file: every key is known, every type is strict, each error once."""

from __future__ import annotations

import dataclasses

import pytest

from stimplan.baseline import AmplitudeMask
from stimplan.exposure import ProtocolCap
from stimplan.holography.ifta import IftaSettings
from stimplan.implant import Implant
from stimplan.optics.system import SLM, Illumination, Relay
from stimplan.sequence import SequenceError, TimingSpec, parse_sequence
from stimplan.sequence.schema import (
    IFTA_KEYS,
    HologramTable,
    ImplantTable,
    LaserTable,
    LimitsTable,
    MaskTable,
    RelayTable,
    SlmTable,
    TimingTable,
    keys_of,
)

from .scenarios import gui_sequence

TEXT = gui_sequence(1.0)


def _init_fields(cls: type) -> set[str]:
    return {f.name for f in dataclasses.fields(cls) if f.init}


@pytest.mark.parametrize(
    ("table", "cls", "not_in_file"),
    [
        (SlmTable, SLM, set()),
        (LaserTable, Illumination, set()),
        (RelayTable, Relay, set()),
        (ImplantTable, Implant, set()),
        (MaskTable, AmplitudeMask, set()),
        (LimitsTable, ProtocolCap, set()),
        (TimingTable, TimingSpec, set()),
        # the seed is the file's own, group weighting follows [implant] and implant_aware
        (HologramTable, IftaSettings, {"seed", "group_weighting"}),
    ],
)
def test_every_field_of_an_object_can_be_written_in_its_table(table, cls, not_in_file):
    # common practice: a constructor's field that no key reaches is a silent default
    assert _init_fields(cls) - not_in_file <= set(keys_of(table))
    if table is HologramTable:
        assert set(IFTA_KEYS) == _init_fields(cls) - not_in_file


def _errors(text: str) -> SequenceError:
    with pytest.raises(SequenceError) as info:
        parse_sequence(text)
    return info.value


@pytest.mark.parametrize(
    ("old", "new", "path", "allowed"),
    [
        ("pitch_um = 8.0", 'pitch_um = "8.0"', "optics.slm.pitch_um", "a number"),
        ("wavelength_nm = 880", "wavelength_nm = true", "optics.laser.wavelength_nm", "a number"),
        ("iterations = 12", "iterations = 12.5", "hologram.iterations", "a whole number"),
        ('preset = "rat"', "preset = 3", "eye.preset", "a string"),
        (
            "implant_aware = true",
            'implant_aware = "yes"',
            "hologram.implant_aware",
            "true or false",
        ),
    ],
)
def test_a_value_of_the_wrong_type_is_refused_once_never_converted(old, new, path, allowed):
    # Source: TOML v1.0.0 (strings, integers, floats and booleans are distinct types);
    # pydantic v2 docs, "Strict Mode" (no str -> number coercion).
    assert old in TEXT
    err = _errors(TEXT.replace(old, new, 1))
    hits = [e for e in err.errors if e.field == path]
    assert len(hits) == 1, str(err)
    assert hits[0].allowed == allowed and hits[0].line is not None
    assert len(err.errors) == 1, str(err)


def test_integral_floats_are_whole_numbers():
    # Source: docs/sequence-format.md, Conventions ("Integers may be written as 8 or 8.0").
    parse_sequence(TEXT.replace("iterations = 12", "iterations = 12.0", 1))


def test_unknown_key_wrong_type_and_out_of_range_are_all_reported_at_once():
    # common practice: one pass lists every problem, each once
    text = TEXT.replace("pitch_um = 8.0", 'pitch_um = "8"\ncolour = 1', 1)
    text = text.replace("magnification = 0.2", "magnification = -0.2", 1)
    err = _errors(text)
    fields = sorted(e.field for e in err.errors)
    assert fields == ["optics.relay.magnification", "optics.slm.colour", "optics.slm.pitch_um"]
    unknown = next(e for e in err.errors if e.field == "optics.slm.colour")
    assert unknown.detail == "unknown key" and "pitch_um" in unknown.allowed


def test_an_implant_threshold_range_is_given_in_its_table_and_checked():
    # common practice: a researcher's own measured range, with its source, rides in
    # [implant]; a reversed range is refused naming the key, the value and what is allowed
    text = TEXT.replace(
        'preset = "rat_55um"',
        'preset = "rat_55um"\nthreshold_mw_per_mm2 = [0.05, 0.5]\nthreshold_source = "our VEP"',
        1,
    )
    spec = parse_sequence(text)
    assert spec.implant.threshold_mw_per_mm2 == (0.05, 0.5)
    assert spec.implant.threshold_source == "our VEP"
    assert spec.to_dict()["implant"]["threshold_mw_per_mm2"] == (0.05, 0.5)
    err = _errors(text.replace("[0.05, 0.5]", "[0.5, 0.05]"))
    assert [e.field for e in err.errors] == ["implant.threshold_mw_per_mm2"]
    assert "low <= high" in err.errors[0].allowed
    err = _errors(text.replace("[0.05, 0.5]", "[0.05, 1e6]"))
    assert [e.field for e in err.errors] == ["implant.threshold_mw_per_mm2[1]"]

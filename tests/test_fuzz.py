"""Fuzzing the sequence reader: broken files end in a spec or a StimplanError with a key path.

The cases (``tests/fuzz_cases.py``) are valid documents broken in structured
ways, truncated files and random bytes; the property is checked by
:func:`case_problem` (common practice for fuzzing: no input may crash the
reader). A bounded, derandomised number of cases runs here; ``benchmarks/fuzz.py``
runs 10 000. Only reading and validation: no hologram is planned.
"""

from __future__ import annotations

import copy
import tomllib

import pytest
from hypothesis import HealthCheck, given, settings

from stimplan.errors import ConfigError
from stimplan.sequence import SequenceError, parse_sequence, sequence_from_dict

from .fuzz_cases import (
    BASE_DOCS,
    BASE_TEXTS,
    FuzzCase,
    case_problem,
    deep_dict_cases,
    deep_text_cases,
    dict_cases,
    file_cases,
    mutated_documents,
    random_byte_cases,
    same_document,
    text_cases,
    toml_dumps,
    toml_values,
    truncated_cases,
)


def _fuzz(n: int) -> settings:
    return settings(
        max_examples=n,
        deadline=None,
        derandomize=True,
        database=None,
        suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
    )


def _keeps_property(case: FuzzCase, folder) -> None:
    problem = case_problem(case, folder=folder)
    assert problem is None, f"{case!r}\n{problem}"


# --------------------------------------------------------------------------
# The harness itself
# --------------------------------------------------------------------------


def test_the_base_documents_are_valid_and_the_writer_keeps_them(tmp_path):
    # common practice: a fuzz corpus starts from valid inputs, and the writer must
    # give back what tomllib read (round trip)
    for text, doc in zip(BASE_TEXTS, BASE_DOCS, strict=True):
        parse_sequence(text)
        written = toml_dumps(doc)
        assert same_document(tomllib.loads(written), doc)
        parse_sequence(written)
        assert case_problem(FuzzCase("file", written.encode()), folder=tmp_path) is None


@_fuzz(60)
@given(mutated_documents(toml_values()))
def test_the_toml_writer_round_trips_mutated_documents(doc):
    # common practice: what the writer writes, tomllib reads back unchanged
    assert same_document(tomllib.loads(toml_dumps(doc)), doc)


# --------------------------------------------------------------------------
# The property, on each kind of case
# --------------------------------------------------------------------------


@_fuzz(500)
@given(dict_cases())
def test_fuzz_mutated_dictionaries(tmp_path_factory, case):
    _keeps_property(case, tmp_path_factory.getbasetemp())


@_fuzz(500)
@given(text_cases())
def test_fuzz_mutated_toml_text(tmp_path_factory, case):
    _keeps_property(case, tmp_path_factory.getbasetemp())


@_fuzz(200)
@given(file_cases())
def test_fuzz_mutated_files(tmp_path_factory, case):
    _keeps_property(case, tmp_path_factory.mktemp("fuzz"))


@_fuzz(300)
@given(truncated_cases())
def test_fuzz_truncated_files(tmp_path_factory, case):
    _keeps_property(case, tmp_path_factory.mktemp("fuzz"))


@_fuzz(40)
@given(deep_dict_cases())
def test_fuzz_deeply_nested_dictionaries(tmp_path_factory, case):
    _keeps_property(case, tmp_path_factory.getbasetemp())


@_fuzz(40)
@given(deep_text_cases())
def test_fuzz_deeply_nested_text(tmp_path_factory, case):
    _keeps_property(case, tmp_path_factory.getbasetemp())


@_fuzz(120)
@given(random_byte_cases())
def test_fuzz_random_bytes(tmp_path_factory, case):
    _keeps_property(case, tmp_path_factory.mktemp("fuzz"))


# --------------------------------------------------------------------------
# Regressions: crashes the fuzzing found, each now a clear error
# --------------------------------------------------------------------------


def _errors_of(call) -> list[ConfigError]:
    with pytest.raises(SequenceError) as info:
        call()
    str(info.value)  # the message can be formatted
    return info.value.errors


def _doc(k: int = 0) -> dict:
    return copy.deepcopy(BASE_DOCS[k])


def test_an_integer_of_thousands_of_digits_is_named_not_crashing():
    # Python refuses str() of integers over 4300 digits (sys.get_int_max_str_digits;
    # Source: Python 3.11 "Integer string conversion length limitation"); tomllib
    # and dicts still carry them, and float() of them overflows.
    doc = _doc()
    doc["optics"]["slm"]["pitch_um"] = 10**5000
    doc["optics"]["slm"]["pixels_x"] = 10**5000
    errs = _errors_of(lambda: sequence_from_dict(doc))
    fields = {e.field for e in errs}
    assert "optics.slm.pixels_x" in fields or "optics.slm.pitch_um" in fields
    assert all("cannot be used" not in e.detail for e in errs)
    assert "digits" in str(errs[0])
    doc = _doc()
    doc["hologram"]["offset_um"] = [2**1100, 0.0]  # beyond the largest float
    errs = _errors_of(lambda: sequence_from_dict(doc))
    assert errs[0].field == "hologram.offset_um[0]" and "finite" in errs[0].allowed


def test_an_unknown_empty_or_odd_key_gets_a_quoted_key_path():
    # Source: TOML 1.0, "Keys": a bare key is A-Za-z0-9_-; any other key is quoted,
    # and the empty quoted key "" is allowed.
    text = BASE_TEXTS[0] + '\n[""]\n'
    errs = _errors_of(lambda: parse_sequence(text))
    assert [e.field for e in errs] == ['""']
    doc = _doc()
    doc["optics"]["a b"] = 1
    errs = _errors_of(lambda: sequence_from_dict(doc))
    assert [e.field for e in errs] == ['optics."a b"']


@pytest.mark.parametrize("value", ["[" * 5000 + "]" * 5000, "{ a = " * 5000 + "1" + " }" * 5000])
def test_values_nested_thousands_deep_in_text_are_refused_with_their_line(value):
    # common practice: bound the work on untrusted input (the TOML reader recurses
    # once per level and would run out of stack)
    text = BASE_TEXTS[0] + "\n[hologram2]\nx = " + value + "\n"
    errs = _errors_of(lambda: parse_sequence(text))
    assert errs[0].field == "hologram2" and "32" in errs[0].allowed
    assert errs[0].line == len(text.splitlines())  # the last line holds the value
    # brackets inside strings and comments do not count
    quiet = BASE_TEXTS[0].replace(
        'title = "small test session"', 'title = "' + "[" * 100 + '" # ' + "{" * 100
    )
    assert parse_sequence(quiet).title == "[" * 100


def test_values_nested_thousands_deep_in_a_dict_are_refused_with_their_key_path():
    # common practice: bound the work on untrusted input
    value = 1.0
    for _ in range(5000):
        value = {"kind": "composite", "stimuli": [value]}
    doc = _doc()
    doc["stimuli"]["deep"] = value
    errs = _errors_of(lambda: sequence_from_dict(doc))
    assert len(errs) == 1 and errs[0].field.startswith("stimuli.deep.stimuli[0]")
    assert "32" in errs[0].allowed
    listed = [1.0]
    for _ in range(5000):
        listed = [listed]
    doc = _doc()
    doc["title"] = listed
    errs = _errors_of(lambda: sequence_from_dict(doc))
    assert errs[0].field.startswith("title[0][0]")


def test_a_shallow_composition_is_still_read():
    # common practice: the nesting cap leaves ordinary nesting alone
    doc = _doc(2)
    value = {"kind": "spot", "diameter_um": 50.0}
    for _ in range(10):
        value = {"kind": "inverted", "stimulus": value}
    doc["stimuli"]["ten"] = value
    assert "ten" in sequence_from_dict(doc).stimuli


def test_a_required_step_value_of_none_is_reported_missing():
    # common practice: a dict may hold None where TOML has no value; it is "missing"
    import tomllib

    from stimplan.errors import StimplanError
    from stimplan.sequence import sequence_from_dict

    from .scenarios import small_sequence

    doc = tomllib.loads(small_sequence())
    doc["steps"][0]["rate_hz"] = None
    with pytest.raises(StimplanError) as err:
        sequence_from_dict(doc)
    assert "steps[0].rate_hz" in str(err.value) and "missing" in str(err.value)
    assert "cannot be used" not in str(err.value)


def test_a_stimulus_name_that_is_not_a_string_is_named():
    # common practice: a dict may hold keys TOML cannot (an integer)
    import tomllib

    from stimplan.errors import StimplanError
    from stimplan.sequence import sequence_from_dict

    from .scenarios import small_sequence

    doc = tomllib.loads(small_sequence())
    doc["stimuli"][1] = {"kind": "flash"}
    with pytest.raises(StimplanError) as err:
        sequence_from_dict(doc)
    assert "stimuli.1" in str(err.value) and "cannot be used" not in str(err.value)

"""Hardware timing of a sequence: truncated pulses, pulse delay, SLM settling,
interleaved trials and per-trial jitter.

Sources: pulse start times of a train of rate f started at t0, t0 + k / f (the
definition of a pulse repetition rate; common practice), worked by hand below;
the random draws from NumPy's documented generators (``numpy.random.default_rng``,
``Generator.permutation``, ``Generator.uniform`` on [low, high), ``SeedSequence``
with ``spawn_key``: https://numpy.org/doc/stable/reference/random/), following
the rules written in ``docs/sequence-format.md``. No hologram is computed here.
"""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest

from stimplan.errors import ConfigError
from stimplan.sequence import (
    SequenceError,
    SequenceSpec,
    StepSpec,
    TimingSpec,
    expand_timeline,
    parse_sequence,
    sequence_from_dict,
    step_order,
    timeline_counts,
    trial_order,
)


def _text(*steps: str, head: str = "") -> str:
    """A human-eye session with a spot, a bar and a checkerboard (demo values)."""
    parts = [
        'format = "stimplan-sequence/1"',
        head,
        '[eye]\npreset = "human"',
        '[stimuli.a]\nkind = "spot"\ndiameter_um = 100.0',
        '[stimuli.b]\nkind = "bar"\nwidth_um = 20.0\nlength_um = 200.0',
        '[stimuli.checks]\nkind = "checkerboard"\ncheck_um = 50.0',
        '[stimuli.dark]\nkind = "blank"',
    ]
    parts += [f"[[steps]]\n{body}" for body in steps]
    return "\n".join(parts) + "\n"


def _errors(text: str) -> list[ConfigError]:
    with pytest.raises(SequenceError) as info:
        spec = parse_sequence(text)
        expand_timeline(spec)
    return info.value.errors


def _step(name: str, duration_ms: float, pulse_ms: float, rate_hz: float, extra: str = "") -> str:
    return (
        f'stimulus = "{name}"\nduration_ms = {duration_ms}\npulse_ms = {pulse_ms}\n'
        f"rate_hz = {rate_hz}\n{extra}"
    )


REVERSAL = (
    'alternate = ["checks", "checks:reversed"]\nalternate_ms = 500\nduration_ms = 2000\n'
    "pulse_ms = 10\nrate_hz = 20\n"
)


# --------------------------------------------------------------------------
# Truncated pulses
# --------------------------------------------------------------------------


def test_a_pulse_cut_by_the_frame_end_is_an_error_naming_the_cut():
    # By hand: 1100 ms at 2 Hz, pulses of 200 ms start at 0, 500 and 1000 ms; the
    # last would end at 1200 ms, 100 ms past the frame. Whole pulses end at 700 or 1200.
    (err,) = _errors(_text(_step("a", 1100, 200, 2)))
    assert err.field == "steps[0].duration_ms"
    assert err.value == 1100
    assert err.line is not None
    assert "700" in err.allowed and "1200" in err.allowed
    assert "cut from 200 to 100 ms" in err.detail
    assert "allow_truncated_pulses" in err.detail


def test_allowed_truncated_pulses_are_cut_at_the_frame_end():
    # By hand, as above: widths 200, 200 and 1100 - 1000 = 100 ms.
    spec = parse_sequence(
        _text(_step("a", 1100, 200, 2), head="[timing]\nallow_truncated_pulses = true")
    )
    assert spec.timing.allow_truncated_pulses
    (frame,) = expand_timeline(spec)
    assert [p.start_ms for p in frame.pulses()] == pytest.approx([0, 500, 1000])
    assert [p.duration_ms for p in frame.pulses()] == pytest.approx([200, 200, 100])


def test_a_spec_built_in_python_refuses_a_truncated_pulse_too():
    # By hand: 105 ms at 20 Hz (period 50 ms), 10 ms pulses at 0, 50 and 100 ms:
    # the last is cut to 5 ms.
    step = StepSpec(stimuli=("a",), duration_ms=105, pulse_ms=10, rate_hz=20, power_mw=1.0)
    assert step.truncated_pulse() == pytest.approx((100.0, 5.0))
    good = parse_sequence(_text(_step("a", 100, 10, 20)))
    with pytest.raises(ConfigError, match="steps\\[0\\].duration_ms"):
        SequenceSpec(
            title="", seed=0, system=good.system, implant=None, stimuli=good.stimuli, steps=[step]
        )
    ok = SequenceSpec(
        title="",
        seed=0,
        system=good.system,
        implant=None,
        stimuli=good.stimuli,
        steps=[step],
        timing=TimingSpec(allow_truncated_pulses=True),
    )
    assert expand_timeline(ok)[0].pulses()[-1].duration_ms == pytest.approx(5.0)


# --------------------------------------------------------------------------
# Pulse delay
# --------------------------------------------------------------------------


def test_pulse_delay_moves_every_frames_train():
    # By hand: frames of 500 ms at 20 Hz (50 ms period), delay 30 ms: each frame of the
    # reversal holds pulses at start + 30 + 50 k, k = 0..9; the last ends at
    # start + 30 + 450 + 10 = start + 490 ms, inside the frame.
    spec = parse_sequence(_text(REVERSAL + "pulse_delay_ms = 30"))
    frames = expand_timeline(spec)
    assert len(frames) == 4
    for fr in frames:
        starts = [p.start_ms for p in fr.pulses()]
        assert starts == pytest.approx([fr.start_ms + 30 + 50 * k for k in range(10)])
        assert all(p.duration_ms == 10 for p in fr.pulses())
    assert timeline_counts(spec) == (4, 40)


def test_pulse_delay_changes_the_pulse_count_of_a_frame():
    # By hand: 120 ms at 20 Hz (50 ms period) holds pulses at 0, 50 and 100 ms without a
    # delay; with 20 ms of delay at 20 and 70 ms (120 is the frame's end): 2 pulses.
    spec = parse_sequence(_text(_step("a", 120, 10, 20, "pulse_delay_ms = 20")))
    (frame,) = expand_timeline(spec)
    assert [p.start_ms for p in frame.pulses()] == pytest.approx([20, 70])
    assert frame.n_pulses == 2 == timeline_counts(spec)[1]


@pytest.mark.parametrize(
    ("body", "field", "allowed"),
    [
        # a delay of a whole period (50 ms at 20 Hz) or more drops the first pulse
        (_step("a", 1000, 10, 20, "pulse_delay_ms = 50"), "steps[0].pulse_delay_ms", "< 1000"),
        # one pulse of 10 ms at 1 Hz in a 100 ms frame: delay at most 90 ms
        (_step("a", 100, 10, 1, "pulse_delay_ms = 95"), "steps[0].pulse_delay_ms", "<= 90"),
        (_step("a", 100, 10, 1, "pulse_delay_ms = -1"), "steps[0].pulse_delay_ms", "[0, 3e+07]"),
        # reversal frames of 500 ms, period 50 ms, pulse 10 ms: a delay of 45 ms cuts the
        # last pulse of each frame (at 495 ms) to 5 ms
        (REVERSAL + "pulse_delay_ms = 45", "steps[0].pulse_delay_ms", "<= 40"),
    ],
)
def test_bad_pulse_delays_are_refused_at_their_key(body, field, allowed):
    errs = _errors(_text(body))
    assert [e.field for e in errs] == [field]
    assert allowed in errs[0].allowed


# --------------------------------------------------------------------------
# SLM settling
# --------------------------------------------------------------------------


def test_a_pulse_during_the_settling_is_an_error_naming_step_time_and_overlap():
    # By hand: the reversal changes hologram at 500, 1000 and 1500 ms; with 30 ms of
    # settling and the first pulse of each frame at its start, each overlaps by 30 ms.
    errs = _errors(_text(REVERSAL, head="[timing]\nslm_settle_ms = 30"))
    assert len(errs) == 1
    (err,) = errs
    assert err.field == "steps[0].pulse_delay_ms"
    assert err.line is not None  # the step's line in the file
    assert ">= 30 ms" in err.allowed
    assert "at 500 ms" in err.detail and "until 530 ms" in err.detail
    assert "by 30 ms" in err.detail


def test_a_short_delay_names_the_remaining_overlap():
    # By hand: 30 ms of settling, pulses 25 ms after each change: 5 ms of overlap.
    (err,) = _errors(_text(REVERSAL + "pulse_delay_ms = 25", head="[timing]\nslm_settle_ms = 30"))
    assert "by 5 ms" in err.detail and ">= 30 ms" in err.allowed


def test_pulses_clear_of_the_settling_pass():
    # By hand: pulses 30 ms after each change start exactly when 30 ms of settling ends.
    spec = parse_sequence(
        _text(REVERSAL + "pulse_delay_ms = 30", head="[timing]\nslm_settle_ms = 30")
    )
    assert spec.timing.slm_settle_ms == 30
    assert len(expand_timeline(spec)) == 4


def test_a_dark_pause_gives_the_slm_time_to_settle():
    # By hand: "a" for 100 ms, then a dark pause; the change to "b" may happen at
    # 100 ms. A 40 ms pause covers 40 ms of settling; a 25 ms pause leaves 15 ms.
    head = "[timing]\nslm_settle_ms = 40"
    ok = parse_sequence(
        _text(_step("a", 100, 10, 20, "blank_after_ms = 40"), _step("b", 100, 10, 20), head=head)
    )
    assert len(expand_timeline(ok)) == 3
    (err,) = _errors(
        _text(_step("a", 100, 10, 20, "blank_after_ms = 25"), _step("b", 100, 10, 20), head=head)
    )
    assert err.field == "steps[1].pulse_delay_ms"
    assert "at 100 ms" in err.detail and "by 15 ms" in err.detail
    # a `blank` stimulus is dark too: 40 ms of it are enough
    ok = parse_sequence(
        _text(
            _step("a", 100, 10, 20),
            _step("dark", 40, 10, 25),
            _step("b", 100, 10, 20),
            head=head,
        )
    )
    assert len(expand_timeline(ok)) == 3


def test_the_same_hologram_again_is_no_change_and_the_first_is_loaded_before_time_zero():
    # common practice: an unchanged SLM does not settle; the first hologram is written
    # (and settled) before the timeline starts
    spec = parse_sequence(
        _text(
            _step("a", 100, 10, 20, "repeat = 3\nblank_after_ms = 5"),
            head="[timing]\nslm_settle_ms = 50",
        )
    )
    assert len(expand_timeline(spec)) == 6


def test_settling_and_timing_ranges_are_checked_at_their_keys():
    # common practice: a value outside its range, or an unknown key, is refused at its
    # own key and line, with what is allowed
    errs = _errors(
        _text(_step("a", 100, 10, 20), head="[timing]\nslm_settle_ms = -1\njitter_ms = 1e9")
    )
    assert {e.field for e in errs} == {"timing.slm_settle_ms", "timing.jitter_ms"}
    assert all(e.line is not None for e in errs)
    (err,) = _errors(_text(_step("a", 100, 10, 20), head="[timing]\nsettle = 3"))
    assert err.field == "timing.settle" and "slm_settle_ms" in err.allowed


# --------------------------------------------------------------------------
# Interleaved trials
# --------------------------------------------------------------------------


def _interleaved(seed: int, repeats: int = 2, head: str = "") -> SequenceSpec:
    return parse_sequence(
        _text(
            _step("a", 100, 10, 20, "repeat = 3"),
            _step("b", 200, 10, 20, "repeat = 2"),
            _step("checks", 300, 10, 20, "repeat = 4"),
            head=f"seed = {seed}\n[order]\ninterleave = true\nrepeats = {repeats}\n{head}",
        )
    )


def test_interleaving_follows_the_documented_draws_from_the_seed():
    # Source: NumPy, default_rng(seed).permutation(n), one draw per repeat, applied to
    # the trials in file order (docs/sequence-format.md, [order] interleave).
    trials = np.array([0, 0, 0, 1, 1, 2, 2, 2, 2])
    rng = np.random.default_rng(11)
    expected = tuple(tuple(int(i) for i in trials[rng.permutation(9)]) for _ in range(2))
    spec = _interleaved(11)
    assert trial_order(spec) == expected
    assert trial_order(_interleaved(11)) == expected
    assert trial_order(_interleaved(12)) != expected
    frames = expand_timeline(spec)
    assert [f.step_index for f in frames] == [i for block in expected for i in block]
    assert expand_timeline(_interleaved(11)) == frames
    # each block holds every trial once; repetitions are counted in time order
    for block in range(2):
        mine = [f for f in frames if f.sequence_repeat == block]
        assert Counter(f.step_index for f in mine) == {0: 3, 1: 2, 2: 4}
        for si in range(3):
            assert [f.repetition for f in mine if f.step_index == si] == list(
                range(spec.steps[si].repeat)
            )
    assert all(f.duration_ms == 100 * (f.step_index + 1) for f in frames)
    assert step_order(spec) == tuple(tuple(dict.fromkeys(b)) for b in expected)


def test_interleave_and_shuffle_together_are_refused():
    # common practice: two keys that would each decide the order are not both taken
    (err,) = _errors(
        _text(_step("a", 100, 10, 20), head="[order]\nshuffle = true\ninterleave = true")
    )
    assert err.field == "order.interleave" and "shuffle" in err.allowed


def test_without_interleave_the_repetitions_of_a_step_stay_together():
    # common practice: the existing order of steps, each with its repetitions in a row
    spec = parse_sequence(
        _text(_step("a", 100, 10, 20, "repeat = 2"), _step("b", 100, 10, 20, "repeat = 2"))
    )
    assert trial_order(spec) == ((0, 0, 1, 1),)


# --------------------------------------------------------------------------
# Jitter
# --------------------------------------------------------------------------


def _jittered(seed: int, jitter_ms: float = 40.0, interleave: str = "false") -> SequenceSpec:
    return parse_sequence(
        _text(
            _step("a", 100, 10, 20, "repeat = 3\nblank_after_ms = 50"),
            _step("b", 200, 10, 20, "repeat = 2"),
            head=(
                f"seed = {seed}\n[order]\ninterleave = {interleave}\nrepeats = 2\n"
                f"[timing]\njitter_ms = {jitter_ms}"
            ),
        )
    )


def test_jitter_follows_the_documented_draws_and_stays_in_bounds():
    # Source: NumPy, default_rng(SeedSequence(seed, spawn_key=(1,))).uniform(0, J, n),
    # one draw per trial in time order (docs/sequence-format.md, [timing] jitter_ms).
    spec = _jittered(5)
    frames = expand_timeline(spec)
    waits = [f.duration_ms for f in frames if f.jitter]
    n_trials = 2 * (3 + 2)
    rng = np.random.default_rng(np.random.SeedSequence(5, spawn_key=(1,)))
    np.testing.assert_array_equal(waits, rng.uniform(0.0, 40.0, n_trials))
    assert len(waits) == n_trials
    assert all(0.0 <= w < 40.0 for w in waits)
    # each trial starts after its own jitter, which follows the end of the trial before
    assert frames[0].jitter and frames[0].start_ms == 0.0
    for a, b in zip(frames, frames[1:], strict=False):
        assert b.start_ms == pytest.approx(a.start_ms + a.duration_ms)
        assert b.start_ms >= a.start_ms
    for k, fr in enumerate(frames):
        if fr.jitter:
            nxt = frames[k + 1]
            assert not nxt.jitter and nxt.stimulus is not None
            assert nxt.start_ms == pytest.approx(fr.start_ms + fr.duration_ms)
    # no pulse of a trial outside its frame, no negative time
    for fr in frames:
        for p in fr.pulses():
            assert fr.start_ms <= p.start_ms and p.end_ms <= fr.end_ms + 1e-9
    # the timeline grew by the jitter only: by hand, one block is 3 x (100 + 50) + 2 x 200
    assert frames[-1].end_ms == pytest.approx(2 * (3 * 150 + 2 * 200) + sum(waits))
    assert timeline_counts(spec) == (len(frames), 2 * (3 * 2 + 2 * 4))


def test_jitter_is_reproducible_and_changes_with_the_seed():
    # common practice: a seeded generator gives the same draws again, others for
    # another seed
    a = [f.duration_ms for f in expand_timeline(_jittered(5)) if f.jitter]
    b = [f.duration_ms for f in expand_timeline(_jittered(5)) if f.jitter]
    c = [f.duration_ms for f in expand_timeline(_jittered(6)) if f.jitter]
    assert a == b and a != c


def test_jitter_leaves_the_order_unchanged():
    # docs/sequence-format.md: the jitter has a stream of its own
    with_jitter = _jittered(5, interleave="true")
    without = _jittered(5, jitter_ms=0, interleave="true")
    assert trial_order(with_jitter) == trial_order(without)
    assert not any(f.jitter for f in expand_timeline(without))


def test_a_jitter_pause_counts_as_settling_time():
    # By hand: "a" then "b" with no pause of their own; the change to "b" may happen when
    # "a" ends, and the jitter pause w before "b" covers w of 30 ms of settling, so the
    # pulse at the start of "b" overlaps by 30 - w (w < 20 ms, so it always does).
    steps = (_step("a", 100, 10, 20), _step("b", 100, 10, 20))
    unchecked = parse_sequence(_text(*steps, head="seed = 2\n[timing]\njitter_ms = 20"))
    frames = expand_timeline(unchecked)
    b = next(k for k, f in enumerate(frames) if f.stimulus == "b")
    assert frames[b - 1].jitter
    w = frames[b - 1].duration_ms
    (err,) = _errors(_text(*steps, head="seed = 2\n[timing]\njitter_ms = 20\nslm_settle_ms = 30"))
    assert err.field == "steps[1].pulse_delay_ms"
    assert f"by {30 - w:g} ms" in err.detail


def test_the_timing_round_trips_through_the_resolved_configuration():
    # common practice: the resolved configuration (the manifest's) rebuilds an equal
    # specification and the same timeline
    spec = _jittered(5, interleave="true")
    d = spec.to_dict()
    assert d["timing"] == {"slm_settle_ms": 0.0, "jitter_ms": 40.0, "allow_truncated_pulses": False}
    assert d["order"]["interleave"] is True
    again = sequence_from_dict(d)
    assert again.timing == spec.timing and again.interleave
    assert expand_timeline(again) == expand_timeline(spec)


def test_the_worked_example_clears_its_settling_with_its_pulse_delay():
    # Source: docs/sequence-format.md, worked example (demo values): 30 ms of settling,
    # reversal pulses 30 ms after each reversal; without the delay each overlaps by 30 ms.
    from .test_sequence import _doc_example

    text = _doc_example()
    spec = parse_sequence(text)
    assert spec.timing.slm_settle_ms == 30
    reversal = [f for f in expand_timeline(spec) if f.stimulus == "checks:reversed"]
    assert reversal and all(f.pulses()[0].start_ms == f.start_ms + 30 for f in reversal)
    line = next(ln for ln in text.splitlines() if ln.startswith("pulse_delay_ms"))
    errs = _errors(text.replace(line + "\n", ""))
    assert len(errs) == 1 and "by 30 ms" in errs[0].detail


def test_the_stimulus_panels_train_refuses_a_cut_pulse_at_its_own_label():
    # By hand: a 1005 ms train at 20 Hz with 10 ms pulses puts its last pulse at 1000 ms,
    # cut to 5 ms; 960 and 1010 ms end on whole pulses. Refused before any computing.
    from stimplan.scenarios import SCENARIOS
    from stimplan_napari._compute import StimulusRequest, compute_stimulus

    request = StimulusRequest(
        optics=next(iter(SCENARIOS)), kind="spot", params={"diameter_um": 200.0}, train_ms=1005.0
    )
    with pytest.raises(ConfigError) as info:
        compute_stimulus(request)
    assert info.value.field == "train length (ms)"
    assert "960" in info.value.allowed and "1010" in info.value.allowed

"""The export's events.csv: one row per pulse, the pulses the exposure assessment sees.

Sources: pulse start times of a train of rate f started at t0, t0 + k / f, and
ceil(duration x rate) pulses in a frame (the definition of a pulse repetition
rate; common practice), counted by hand below for demo sequences of our own;
the manifest's SHA-256 against ``hashlib`` (FIPS 180-4).
"""

from __future__ import annotations

import csv
import hashlib
import json

import pytest

from stimplan.plan import plan_sequence, wiring
from stimplan.present.export import export_plan, load_export
from stimplan.sequence import SequenceError, SequenceSpec, TimingSpec, parse_sequence

from .scenarios import header

# Demo values: a 128² SLM, a spot for 500 ms at 20 Hz then 200 ms dark, and a bar
# grating for 300 ms at 10 Hz.
TWO_STEPS = header(128, title="events check (demo values)", seed=4, iterations=10, aware=False) + (
    """
[stimuli.spot]
kind = "spot"
diameter_um = 300

[stimuli.bars]
kind = "grating"
bar_width_px = 2

[[steps]]
stimulus = "spot"
duration_ms = 500
pulse_ms = 10
rate_hz = 20
power_mw = 1.5
blank_after_ms = 200

[[steps]]
stimulus = "bars"
duration_ms = 300
pulse_ms = 5
rate_hz = 10
power_mw = 0.75
"""
)


@pytest.fixture(scope="module")
def plan():
    return plan_sequence(parse_sequence(TWO_STEPS), progress=False)


@pytest.fixture(scope="module")
def exported(plan, tmp_path_factory):
    return export_plan(plan, tmp_path_factory.mktemp("events") / "export")


def _rows(folder):
    with open(folder / "events.csv", newline="") as fh:
        return list(csv.DictReader(fh))


def test_events_have_one_row_per_pulse_at_the_hand_counted_times(plan, exported):
    # By hand: the spot, 500 ms x 20 Hz = 10 pulses at k x 50 ms (k = 0..9), 10 ms,
    # 1.5 mW; a 200 ms pause; the grating from 700 ms, 300 ms x 10 Hz = 3 pulses at
    # 700 + k x 100 ms, 5 ms, 0.75 mW. 13 rows in time order.
    rows = _rows(exported)
    assert list(rows[0]) == [
        "start_ms",
        "width_ms",
        "laser_power_mw",
        "hologram_index",
        "condition",
        "frame_index",
        "stimulus",
    ]
    assert len(rows) == 10 + 3
    starts = [float(r["start_ms"]) for r in rows]
    assert starts == pytest.approx(
        [k * 1000 / 20 for k in range(10)] + [700 + k * 100 for k in range(3)]
    )
    assert [float(r["width_ms"]) for r in rows] == [10.0] * 10 + [5.0] * 3
    assert [float(r["laser_power_mw"]) for r in rows] == [1.5] * 10 + [0.75] * 3
    assert [r["condition"] for r in rows] == ["1"] * 10 + ["2"] * 3
    assert [r["stimulus"] for r in rows] == ["spot"] * 10 + ["bars"] * 3
    spot = plan.stimuli["spot"].hologram_index
    bars = plan.stimuli["bars"].hologram_index
    assert {int(r["hologram_index"]) for r in rows[:10]} == {spot}
    assert {int(r["hologram_index"]) for r in rows[10:]} == {bars} != {spot}
    # the frame of each row is the row of timeline.csv that holds it
    bundle = load_export(exported)
    for r in bundle.events:
        fr = bundle.timeline[r["frame_index"]]
        assert fr["start_ms"] <= r["start_ms"] < fr["start_ms"] + fr["duration_ms"]
        assert fr["hologram_index"] == r["hologram_index"]


def test_events_are_checksummed_in_the_manifest(exported):
    # Source: SHA-256 (FIPS 180-4) through hashlib, against the manifest's entry.
    man = json.loads((exported / "manifest.json").read_text())
    entry = man["files"]["events.csv"]
    data = (exported / "events.csv").read_bytes()
    assert entry["sha256"] == hashlib.sha256(data).hexdigest()
    assert entry["bytes"] == len(data)
    assert man["n_events"] == 13
    assert "estimate" in man["cautions"]


def test_the_exposure_sees_the_pulses_of_events_csv(plan, exported, monkeypatch):
    # common practice: the file that drives the laser and the safety estimate must
    # describe the same light. Capture what the assessment is given.
    seen = []

    def capture(frames, *args, **kwargs):
        seen.extend(frames)
        return None

    monkeypatch.setattr(wiring, "assess_sequence", capture)
    wl = plan.spec.system.illumination.wavelength_nm
    wiring.assess_frames(plan.frames, plan.stimuli, "hologram", wl, plan.spec)
    pulses = sorted(
        (p.start_ms, p.duration_ms, p.scale, int(f.key.split("-")[1]))
        for f in seen
        for p in f.pulses
    )
    # the maps are computed at 1 mW, so a pulse's scale is its laser power in mW
    rows = [
        (
            float(r["start_ms"]),
            float(r["width_ms"]),
            float(r["laser_power_mw"]),
            int(r["hologram_index"]),
        )
        for r in _rows(exported)
    ]
    assert len(pulses) == len(rows) == plan.exposure.n_pulses
    for got, want in zip(pulses, rows, strict=True):
        assert got == pytest.approx(want)


def test_an_export_that_fails_after_the_events_leaves_nothing(plan, tmp_path):
    # common practice: an atomic write leaves the old state or the whole new one
    with pytest.raises(RuntimeError):
        export_plan(plan, tmp_path / "out", fail_after="events")
    assert list(tmp_path.iterdir()) == []


JITTERED = header(
    128, title="jittered events (demo values)", seed=9, iterations=10, aware=False
) + (
    """
[order]
interleave = true
repeats = 2

[timing]
jitter_ms = 25

[stimuli.spot]
kind = "spot"
diameter_um = 300

[stimuli.bars]
kind = "grating"
bar_width_px = 2

[[steps]]
stimulus = "spot"
duration_ms = 200
pulse_ms = 4
rate_hz = 25
power_mw = 1.0
repeat = 2

[[steps]]
stimulus = "bars"
duration_ms = 100
pulse_ms = 4
rate_hz = 50
power_mw = 0.5
repeat = 3
"""
)


def test_jittered_interleaved_events_follow_their_frames(tmp_path):
    # By hand: per block 2 spot trials of 200 ms x 25 Hz = 5 pulses and 3 grating trials
    # of 100 ms x 50 Hz = 5 pulses: 25 pulses per block, 50 for two; each trial's pulses
    # at its frame start + k x 1000 / rate.
    plan = plan_sequence(parse_sequence(JITTERED), progress=False)
    rows = _rows(export_plan(plan, tmp_path / "j"))
    assert len(rows) == 2 * (2 * 5 + 3 * 5)
    starts = [float(r["start_ms"]) for r in rows]
    assert starts == sorted(starts)
    expected = []
    for fr in plan.frames:
        if fr.stimulus is not None:
            rate = 25 if fr.stimulus == "spot" else 50
            expected += [fr.start_ms + k * 1000 / rate for k in range(5)]
    assert starts == pytest.approx(expected, abs=1e-6)
    # the jitter pauses are dark frames between trials, and no pulse falls in one
    dark = [fr for fr in plan.frames if fr.stimulus is None]
    assert len(dark) == 10 and all(0 <= fr.duration_ms < 25 for fr in dark)
    for fr in dark:
        # (the file gives times to 1 ns)
        assert not any(fr.start_ms <= s < fr.start_ms + fr.duration_ms - 1e-6 for s in starts)


def test_a_pulse_in_the_settling_stops_planning_before_any_hologram(monkeypatch):
    # A spec built in Python (no file check): back-to-back stimuli, 20 ms of settling.
    spec = parse_sequence(TWO_STEPS.replace("blank_after_ms = 200", "blank_after_ms = 0"))
    import dataclasses

    settled = dataclasses.replace(spec, timing=TimingSpec(slm_settle_ms=20))
    assert isinstance(settled, SequenceSpec)

    def no_batch(*a, **k):
        raise AssertionError("holograms computed before the timeline was checked")

    monkeypatch.setattr("stimplan.plan.run.run_batch", no_batch)
    with pytest.raises(SequenceError, match="overlaps the settling by 20 ms"):
        plan_sequence(settled, progress=False)


def test_an_unchecked_settling_is_said_beside_the_estimate(plan):
    # By hand: the spot's pulses, then the grating's: one hologram change, and
    # slm_settle_ms is left at 0, so the estimate says the settling was not checked.
    notes = [n for n in plan.exposure.notes if "slm_settle_ms is 0" in n]
    assert len(notes) == 1 and "Hologram changes between pulses: 1." in notes[0]
    assert "Note: " + notes[0] in plan.exposure.summary()

"""The pulse events of a plan: one row per light pulse, to drive a TTL or DAQ card."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

from ..plan.wiring import exposed_frames

__all__ = ["EVENT_COLUMNS", "PulseEvent", "pulse_events", "events_csv_text"]

#: The columns of ``events.csv``.
EVENT_COLUMNS = (
    "start_ms",
    "width_ms",
    "laser_power_mw",
    "hologram_index",
    "condition",
    "frame_index",
    "stimulus",
)


@dataclass(frozen=True)
class PulseEvent:
    """One light pulse of the timeline.

    Parameters
    ----------
    start_ms : float
        Start from the beginning of the sequence, ms.
    width_ms : float
        How long the laser is on, ms.
    laser_power_mw : float
        Laser power on the SLM during the pulse, mW (the planned power, also
        for a step given by a target irradiance).
    hologram_index : int
        Page of the hologram stack shown (``holograms.tif``).
    condition : int
        The step of the sequence file, counted from 1 (``steps[0]`` is 1), so
        that a digital code of 0 never marks a pulse.
    frame_index : int
        Row of ``timeline.csv``.
    stimulus : str
        Name of the stimulus in the sequence file.
    """

    start_ms: float
    width_ms: float
    laser_power_mw: float
    hologram_index: int
    condition: int
    frame_index: int
    stimulus: str


def pulse_events(plan) -> tuple[PulseEvent, ...]:
    """Every pulse of a plan's timeline in time order, as the exposure assessment sees it.

    The pulses are those of :func:`stimplan.plan.wiring.exposed_frames`, the
    frames whose pulses the plan's exposure assessment counts, at each
    frame's laser power.

    Returns
    -------
    tuple of PulseEvent
    """
    out = [
        PulseEvent(
            start_ms=float(p.start_ms),
            width_ms=float(p.duration_ms),
            laser_power_mw=float(fr.power_mw),
            hologram_index=int(fr.hologram_index),
            condition=int(fr.step_index) + 1,
            frame_index=int(fr.index),
            stimulus=str(fr.stimulus),
        )
        for fr in exposed_frames(plan.frames)
        for p in fr.pulses
    ]
    out.sort(key=lambda e: e.start_ms)  # stable: frames are already in time order
    return tuple(out)


def events_csv_text(events) -> str:
    """The text of ``events.csv``: a header row, then one row per pulse.

    Times in ms with six decimals (1 ns, the shortest supported pulse), the
    power with nine significant digits.
    """
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(EVENT_COLUMNS)
    for e in events:
        w.writerow(
            [
                f"{e.start_ms:.6f}",
                f"{e.width_ms:.6f}",
                f"{e.laser_power_mw:.9g}",
                e.hologram_index,
                e.condition,
                e.frame_index,
                e.stimulus,
            ]
        )
    return buf.getvalue()

"""The sequence file: parsing, validation and expansion into a timeline.

A sequence file is a TOML document (``format = "stimplan-sequence/1"``) that
names the optical system, the eye, the implant, the hologram settings, a set
of named stimuli and an ordered list of steps. :func:`load_sequence` and
:func:`parse_sequence` turn it into a validated :class:`SequenceSpec` with
physical units; :func:`expand_timeline` turns that into frames
(:class:`FrameSpec`) in time order, each with its train of light pulses.
The keys are described in ``docs/sequence-format.md``.

One idea per module, in the order of the flow: ``keys`` (format and size
caps), ``schema`` (every key of the file and the type of its value, a
pydantic model per table), ``lines`` (where a key is written), ``report``
(every error at once, each with its line),
``model`` (the validated steps and file), ``timing`` (SLM settling, trial
jitter, truncated pulses), ``sections`` (building each section), ``settle``
(pulses against the SLM's settling), ``timeline`` (frames and pulses),
``load`` (text to a model).

Validation collects every problem it finds and raises one
:class:`SequenceError` that lists them all, each with its key path
(``steps[3].pulse_ms``), the value, what is allowed and, where it can be
found, the line of the file.

Timeline rules
    Steps run in file order, or shuffled from ``seed`` (a fresh permutation
    for each whole-sequence repeat). A step runs ``repeat`` times (its
    trials), each repetition followed by a dark pause of ``blank_after_ms``
    (a frame with no stimulus and no pulses). With ``interleave`` the trials
    of all steps are shuffled together within each repeat; with
    ``[timing] jitter_ms`` each trial is preceded by a dark pause drawn from
    ``[0, jitter_ms)``. An alternating step is cut into frames of
    ``alternate_ms`` that show the two stimuli in turn; ``duration_ms`` must
    be a whole number of ``alternate_ms``, and ``alternate_ms`` a whole number
    of pulse periods (no frame is cut short). Every frame starts its own pulse
    train ``pulse_delay_ms`` after its start, with pulses of ``pulse_ms``
    every ``1000 / rate_hz`` ms; a pulse that would run past the frame's end
    is an error unless ``[timing] allow_truncated_pulses = true`` (it is then
    cut at the end). No pulse may start within ``[timing] slm_settle_ms`` of a
    hologram change.

References
----------
.. [1] TOML v1.0.0, https://toml.io/en/v1.0.0 (the file syntax; read with
   the standard library's :mod:`tomllib`).
.. [2] J. V. Odom et al., "ISCEV standard for clinical visual evoked
   potentials (2016 update)", *Doc. Ophthalmol.* 133, 1 (2016)
   (pattern reversal: the two phases of a checkerboard alternate).
"""

from __future__ import annotations

from .keys import FORMAT, MAX_FILE_BYTES, MAX_FRAMES, MAX_PULSES
from .load import load_sequence, parse_sequence, sequence_from_dict
from .model import SequenceSpec, StepSpec
from .report import SequenceError
from .timeline import (
    FrameSpec,
    expand_timeline,
    step_order,
    timeline_counts,
    total_duration_ms,
    trial_jitter_ms,
    trial_order,
)
from .timing import TimingSpec

__all__ = [
    "FORMAT",
    "MAX_FILE_BYTES",
    "MAX_FRAMES",
    "MAX_PULSES",
    "SequenceError",
    "SequenceSpec",
    "StepSpec",
    "FrameSpec",
    "load_sequence",
    "parse_sequence",
    "sequence_from_dict",
    "step_order",
    "trial_order",
    "trial_jitter_ms",
    "TimingSpec",
    "timeline_counts",
    "expand_timeline",
    "total_duration_ms",
]

"""From a sequence to a plan: holograms, predictions, readouts, baseline and exposure.

Modules in the order of the flow: ``spool`` (arrays kept on disk), ``wiring``
(the timeline as frames for the exposure), ``model`` (the plan), ``jobs`` (one
hologram per distinct stimulus), ``run`` (:func:`plan_sequence`).

Each distinct stimulus is computed once. Everything downstream of the laser
is linear in the laser power, so a stimulus is predicted once at 1 mW and
every frame scales that prediction to its own power.

References
----------
.. [1] ICNIRP, "Guidelines on limits of exposure to laser radiation of
   wavelengths between 180 nm and 1,000 µm", *Health Phys.* 105, 271 (2013).
"""

from __future__ import annotations

from .jobs import plan_jobs
from .model import FramePlan, Plan, StimulusPlan
from .run import plan_sequence
from .spool import REFERENCE_POWER_MW, stimulus_key

__all__ = [
    "REFERENCE_POWER_MW",
    "plan_jobs",
    "StimulusPlan",
    "FramePlan",
    "Plan",
    "plan_sequence",
    "stimulus_key",
]

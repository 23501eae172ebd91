"""The hardware timing of a sequence: SLM settling, trial jitter, truncated pulses."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from .. import validate

__all__ = ["TimingSpec", "JITTER_STREAM"]


#: ``spawn_key`` of the random stream of the trial jitter: the jitter is drawn
#: from ``numpy.random.default_rng(numpy.random.SeedSequence(seed, spawn_key=(1,)))``,
#: a stream of its own, so turning jitter on or off leaves the (shuffled or
#: interleaved) order, drawn from ``numpy.random.default_rng(seed)``, unchanged.
JITTER_STREAM = 1


@dataclass(frozen=True)
class TimingSpec:
    """How the timeline meets the hardware (the ``[timing]`` table).

    Parameters
    ----------
    slm_settle_ms : float
        Time the SLM takes to settle after a hologram change, ms, in
        ``[0, 1e4]``. No pulse may start before a change plus this time
        (:func:`stimplan.sequence.settle.settling_errors`): a pulse during a
        switch shows a mixture of two holograms, whose retinal image (and
        exposure) is neither one's. The default 0 checks nothing: set the
        time measured on your SLM at your wavelength.
    jitter_ms : float
        Per-trial start jitter, ms, in ``[0, 3e7]``. Before each trial (one
        repetition of a step) a dark pause drawn uniformly from
        ``[0, jitter_ms)`` is inserted; the draws come from the stream
        :data:`JITTER_STREAM` of the sequence seed, one per trial in time
        order. The pause only delays: no trial overlaps another and no time
        is negative.
    allow_truncated_pulses : bool
        Accept pulses that a frame's end cuts short (they are then cut at the
        frame's end, and the cut width is what the timeline, the exposure and
        ``events.csv`` hold). By default such a step is an error.

    References
    ----------
    .. [1] NumPy documentation, "Random Generator" and ``SeedSequence``
       (``spawn_key``: independent streams from one seed),
       https://numpy.org/doc/stable/reference/random/.
    """

    slm_settle_ms: float = 0.0
    jitter_ms: float = 0.0
    allow_truncated_pulses: bool = False

    def __post_init__(self) -> None:
        f = object.__setattr__
        f(
            self,
            "slm_settle_ms",
            validate.physical("timing.slm_settle_ms", self.slm_settle_ms, "slm_settle_ms"),
        )
        f(self, "jitter_ms", validate.physical("timing.jitter_ms", self.jitter_ms, "jitter_ms"))
        f(
            self,
            "allow_truncated_pulses",
            validate.boolean("timing.allow_truncated_pulses", self.allow_truncated_pulses),
        )

    def to_dict(self) -> dict[str, Any]:
        """The ``[timing]`` table, every key written."""
        return {
            "slm_settle_ms": self.slm_settle_ms,
            "jitter_ms": self.jitter_ms,
            "allow_truncated_pulses": self.allow_truncated_pulses,
        }

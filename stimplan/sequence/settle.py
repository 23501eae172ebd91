"""Pulses against the SLM's settling after each hologram change.

A liquid-crystal SLM takes a time to settle after a new hologram is written;
a pulse in that time shows a mixture of the two holograms, whose retinal image
(and so its exposure) is neither hologram's. That regime is not assessed, so
it is refused.

The model: the first hologram is on the SLM, settled, before the timeline
starts. A dark frame (a pause, or a ``blank`` stimulus) holds no hologram, so
the SLM may change as soon as the last lit frame of one hologram ends. A lit
frame whose hologram differs from that of the last lit frame before it is a
change at the end of that frame (the start of the next frame): its first pulse
must start at least ``slm_settle_ms`` later. Two stimulus names count as two
holograms.

References
----------
.. [1] J. Otón, P. Ambs, M. S. Millán and E. Pérez-Cabré, "Dynamic calibration
   for improving the speed of a parallel-aligned liquid-crystal-on-silicon
   display", Optical Society of America (published 4 August 2009; Doc. ID
   109654): a driven LCoS phase SLM followed 32 Hz for extreme phase changes
   (about 31 ms each) - settling in tens of ms.
"""

from __future__ import annotations

from collections.abc import Collection, Iterable
from typing import Any

from ..errors import ConfigError

__all__ = ["settling_errors"]

# A pulse that starts within this many ms before the end of the settling is on time
# (floating-point rounding of frame start times), 1 fs.
_TIME_TOL_MS = 1e-12


def settling_errors(
    frames: Iterable[Any], slm_settle_ms: float, *, dark_names: Collection[str] = ()
) -> list[ConfigError]:
    """The steps whose first pulse after a hologram change starts while the SLM settles.

    Parameters
    ----------
    frames : iterable of FrameSpec
        In time order; each has ``index``, ``start_ms``, ``end_ms``,
        ``stimulus``, ``n_pulses``, ``pulse_delay_ms`` and ``step_index``.
    slm_settle_ms : float
        Settling time after a change, ms (0 checks nothing).
    dark_names : collection of str
        Stimulus names that put no light on the retina (``blank``): frames
        of them are dark.

    Returns
    -------
    list of ConfigError
        One per step (at its worst frame), naming the step's
        ``pulse_delay_ms``, the change, its time and the overlap.
    """
    if slm_settle_ms <= 0:
        return []
    worst: dict[int, tuple[float, ConfigError]] = {}
    shown: str | None = None
    free_ms = 0.0
    for fr in frames:
        if fr.stimulus is None or fr.stimulus in dark_names or fr.n_pulses == 0:
            continue
        if shown is not None and fr.stimulus != shown:
            first_ms = fr.start_ms + fr.pulse_delay_ms
            settled_ms = free_ms + slm_settle_ms
            overlap = settled_ms - first_ms
            if overlap > _TIME_TOL_MS and overlap > worst.get(fr.step_index, (0.0, None))[0]:
                worst[fr.step_index] = (overlap, _error(fr, shown, free_ms, slm_settle_ms, overlap))
        shown = fr.stimulus
        free_ms = fr.end_ms
    return [worst[k][1] for k in sorted(worst)]


def _error(fr: Any, shown: str, change_ms: float, settle_ms: float, overlap: float) -> ConfigError:
    needed = fr.pulse_delay_ms + overlap
    return ConfigError(
        f"steps[{fr.step_index}].pulse_delay_ms",
        fr.pulse_delay_ms,
        f">= {needed:g} ms, or a dark pause of {settle_ms:g} ms before the change",
        f"the SLM changes from {shown!r} to {fr.stimulus!r} at {change_ms:g} ms and settles "
        f"until {change_ms + settle_ms:g} ms ([timing] slm_settle_ms = {settle_ms:g}); the "
        f"pulse at {fr.start_ms + fr.pulse_delay_ms:g} ms (frame {fr.index}) overlaps the "
        f"settling by {overlap:g} ms and would mix two holograms",
    )

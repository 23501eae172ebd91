"""Will the implant render a stimulus at all: its finest detail against the array's sampling.

Each stimulus has a *critical detail*, the size that must survive for it to be
seen as meant:

===================  =========================================
stimulus             critical detail
===================  =========================================
grating              bar width (half the period)
checkerboard         check size
optotype             one unit: stroke = gap = MAR (height / 5)
bar                  bar width
spot                 diameter
annulus              ring width (outer - inner diameter) / 2
composite            the finest of its parts
inverted, masked     that of the stimulus inside
flash, blank, image  none (no detail to resolve)
===================  =========================================

The criterion is the sampling (Nyquist) limit of a pixel array: the finest
grating an array of pitch ``p`` renders has a bar width of about one pitch
(period ``2 p``), which is also where the measured grating acuity of
photovoltaic arrays in rats lies [1]_ [2]_. A detail finer than one pitch is
*not resolvable*; one under 1.5 pitches is flagged as near the limit (a
common-practice margin: the pattern's phase against the lattice then decides
what is shown).

References
----------
.. [1] H. Lorach et al., "Photovoltaic restoration of sight with high visual
   acuity", *Nat. Med.* 21, 476 (2015).
.. [2] E. Ho et al., "Grating acuity of prosthetic vision in blind rats matches
   the pixel pitch of photovoltaic subretinal arrays below 50 µm", *J. Neural
   Eng.* 16, 066027 (2019).
.. [3] ISO 8596 (optotypes: stroke and gap of one fifth of the height).
"""

from __future__ import annotations

from dataclasses import dataclass

from . import validate
from .stimuli import (
    Annulus,
    Bar,
    Checkerboard,
    Composite,
    Grating,
    Inverted,
    Masked,
    Optotype,
    Spot,
    Stimulus,
)

__all__ = ["NEAR_LIMIT", "critical_detail_um", "Legibility", "legibility"]

#: Details under this many pixel pitches are flagged as near the sampling limit.
NEAR_LIMIT = 1.5


def critical_detail_um(stimulus: Stimulus) -> float | None:
    """The finest size of ``stimulus`` that must survive (µm), or None if it has none."""
    if isinstance(stimulus, Grating):
        return stimulus.period_um / 2.0
    if isinstance(stimulus, Checkerboard):
        return stimulus.check_um
    if isinstance(stimulus, Optotype):
        return stimulus.unit_um
    if isinstance(stimulus, Bar):
        return stimulus.width_um
    if isinstance(stimulus, Spot):
        return stimulus.diameter_um
    if isinstance(stimulus, Annulus):
        return (stimulus.outer_diameter_um - stimulus.inner_diameter_um) / 2.0
    if isinstance(stimulus, Composite):
        parts = [critical_detail_um(s) for s in stimulus.stimuli]
        parts = [p for p in parts if p is not None]
        return min(parts) if parts else None
    if isinstance(stimulus, (Inverted, Masked)):
        return critical_detail_um(stimulus.stimulus)
    return None


@dataclass(frozen=True)
class Legibility:
    """A stimulus's finest detail against an array's pixel pitch.

    Attributes
    ----------
    resolvable : bool or None
        False if the finest detail is under one pixel pitch; None without a
        detail to resolve (a flash).
    detail_um : float or None
    pitch_um : float
    warnings : tuple of str
        What a user must know: not resolvable, or near the limit.
    """

    resolvable: bool | None
    detail_um: float | None
    pitch_um: float
    warnings: tuple[str, ...]


def legibility(stimulus: Stimulus, pitch_um: float, *, name: str = "stimulus") -> Legibility:
    """Whether an array of pixels of ``pitch_um`` can render ``stimulus``'s finest detail.

    Parameters
    ----------
    stimulus : Stimulus
    pitch_um : float
        The implant's pixel pitch (centre to centre), µm.
    name : str
        The stimulus's name in the warnings.

    Returns
    -------
    Legibility

    References
    ----------
    .. [1] Lorach et al. (2015); Ho et al. (2019): see the module notes.
    """
    pitch = validate.physical("implant.pitch_um", pitch_um, "implant_pitch_um")
    detail = critical_detail_um(stimulus)
    if detail is None:
        return Legibility(None, None, pitch, ())
    what = f"{name}: finest detail {detail:.3g} µm ({stimulus.kind})"
    if detail < pitch:
        return Legibility(
            False,
            detail,
            pitch,
            (
                f"{what} is finer than the pixel pitch {pitch:.3g} µm (the array's sampling "
                "limit): the implant cannot render it as meant",
            ),
        )
    if detail < NEAR_LIMIT * pitch:
        return Legibility(
            True,
            detail,
            pitch,
            (
                f"{what} is under {NEAR_LIMIT:g} pixel pitches ({pitch:.3g} µm): near the "
                "sampling limit, its position on the lattice decides what is shown",
            ),
        )
    return Legibility(True, detail, pitch, ())

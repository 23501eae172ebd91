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

Two checks. The first is the sampling (Nyquist) limit of a pixel array: the finest
grating an array of pitch ``p`` renders has a bar width of about one pitch
(period ``2 p``), which is also where the measured grating acuity of
photovoltaic arrays in rats lies [1]_ [2]_. A detail finer than one pitch is
*not resolvable*; one under 1.5 pitches is flagged as near the limit (a
common-practice margin: the pattern's phase against the lattice then decides
what is shown).

The second looks at the rendering on the actual array: which pixels the
stimulus turns ON (a pixel is ON when the mean stimulus over its cell reaches
the ON threshold, as the implant-aware target counts it). The critical
feature is *rendered* if removing it changes that pattern: a Landolt ring
against the closed ring of the same size, a tumbling E against the filled
square it fills, a grating against itself shifted by half a period, a
checkerboard against its reversed board. Where the two patterns are the
same, the feature has no contrast between ON and OFF pixels on this array,
wherever its size stands against the pitch.

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

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from . import validate
from .grid import RetinalGrid
from .implant.target import pixel_states
from .stimuli import (
    Annulus,
    Bar,
    Checkerboard,
    Composite,
    Grating,
    Inverted,
    LandoltRing,
    Masked,
    Optotype,
    Spot,
    Stimulus,
    TumblingE,
)

__all__ = [
    "NEAR_LIMIT",
    "critical_detail_um",
    "featureless_partner",
    "feature_rendered",
    "Legibility",
    "legibility",
]

#: Most samples per side of the grid the rendering check renders on.
MAX_RENDER_SAMPLES = 1024

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
        What a user must know: not resolvable, near the limit, not rendered.
    rendered : bool or None
        Whether the critical feature changes which pixels are ON on the
        implant (:func:`feature_rendered`); None when no implant was given
        or the stimulus has no featureless partner.
    """

    resolvable: bool | None
    detail_um: float | None
    pitch_um: float
    warnings: tuple[str, ...]
    rendered: bool | None = None


def legibility(
    stimulus: Stimulus,
    pitch_um: float,
    *,
    name: str = "stimulus",
    implant=None,
    threshold: float = 0.5,
) -> Legibility:
    """Whether an array of pixels of ``pitch_um`` can render ``stimulus``'s finest detail.

    Parameters
    ----------
    stimulus : Stimulus
    pitch_um : float
        The implant's pixel pitch (centre to centre), µm.
    name : str
        The stimulus's name in the warnings.
    implant : Implant, optional
        With it, the rendering on the array is checked too (:func:`feature_rendered`).
    threshold : float
        The ON threshold of a pixel's mean stimulus, in (0, 1].

    Returns
    -------
    Legibility

    References
    ----------
    .. [1] Lorach et al. (2015); Ho et al. (2019): see the module notes.
    """
    base = _sampling(stimulus, pitch_um, name)
    if implant is None:
        return base
    rendered = feature_rendered(stimulus, implant, threshold=threshold)
    if rendered is not False:
        return dataclasses.replace(base, rendered=rendered)
    lost = (
        f"{name}: its critical feature ({stimulus.kind}) turns no pixel differently from "
        "the same stimulus without it: on this array it has no contrast between ON and "
        "OFF pixels"
    )
    return dataclasses.replace(base, rendered=False, warnings=(*base.warnings, lost))


def _sampling(stimulus: Stimulus, pitch_um: float, name: str) -> Legibility:
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


def featureless_partner(stimulus: Stimulus) -> Stimulus | None:
    """The same stimulus without its critical feature, or None if it has no such twin.

    A Landolt ring's closed ring, a tumbling E's filled square, a grating
    shifted by half a period, a checkerboard's reversed board.
    """
    if isinstance(stimulus, LandoltRing):
        h = stimulus.height_um
        return Annulus(
            inner_diameter_um=0.6 * h,
            outer_diameter_um=h,
            contrast=stimulus.contrast,
            polarity=stimulus.polarity,
            center_x_um=stimulus.center_x_um,
            center_y_um=stimulus.center_y_um,
        )
    if isinstance(stimulus, TumblingE):
        h = stimulus.height_um
        return Bar(
            width_um=h,
            length_um=h,
            contrast=stimulus.contrast,
            polarity=stimulus.polarity,
            center_x_um=stimulus.center_x_um,
            center_y_um=stimulus.center_y_um,
            rotation_deg=stimulus.rotation_deg,
        )
    if isinstance(stimulus, Grating):
        return dataclasses.replace(stimulus, phase_deg=stimulus.phase_deg + 180.0)
    if isinstance(stimulus, Checkerboard):
        return stimulus.reversed()
    return None


def _implant_grid(implant, detail_um: float) -> RetinalGrid:
    """A grid centred on the optical axis that holds the implant, fine enough for its detail."""
    x0, x1, y0, y1 = implant.footprint_extent_um
    half = 1.05 * max(abs(x0), abs(x1), abs(y0), abs(y1))
    pitch = max(min(implant.pitch_um / 8.0, detail_um / 4.0), 2 * half / MAX_RENDER_SAMPLES)
    n = max(8, math.ceil(2 * half / pitch))
    return RetinalGrid((n, n), pitch, pitch)


def feature_rendered(stimulus: Stimulus, implant, *, threshold: float = 0.5) -> bool | None:
    """Whether a stimulus's critical feature changes which implant pixels are ON.

    Parameters
    ----------
    stimulus : Stimulus
    implant : Implant
    threshold : float
        A pixel is ON when its cell's mean stimulus reaches this, in (0, 1].

    Returns
    -------
    bool or None
        None when the stimulus has no featureless partner
        (:func:`featureless_partner`); False when no pixel is ON or the ON
        pixels are those of the partner.
    """
    partner = featureless_partner(stimulus)
    detail = critical_detail_um(stimulus)
    if partner is None or detail is None:
        return None
    grid = _implant_grid(implant, detail)
    on = pixel_states(stimulus.render(grid), grid, implant, threshold=threshold).on
    twin = pixel_states(partner.render(grid), grid, implant, threshold=threshold).on
    return bool(on.any()) and not np.array_equal(on, twin)

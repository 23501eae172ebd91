"""The exposure of a plan's timeline: its frames as lazy maps for the exposure assessment."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from ..errors import ConfigError
from ..exposure import (
    EyeModel,
    Frame,
    assess_sequence,
    retinal_image_diameter_um,
)
from ..grid import RetinalGrid
from ..holography.propagation import with_higher_orders, zero_order_irradiance
from ..holography.zero_order import coherent_zero_order_bound
from .spool import (
    REFERENCE_POWER_MW,
)

__all__ = [
    "exposed_frames",
    "exposure_maps",
    "check_exposure_supported",
    "exposure_map_notes",
    "assess_frames",
    "orders_margin",
    "with_orders_note",
    "hologram_changes",
    "with_settling_note",
]


def exposed_frames(frames):
    """The frames whose pulses the exposure assessment counts: lit, with pulses.

    The export's ``events.csv`` lists the pulses of these same frames, so the
    file that drives the laser and the assessment see the same pulses.
    """
    return [fr for fr in frames if fr.lit and fr.pulses]


def assess_frames(
    frames,
    plans,
    which: str,
    wavelength_nm: float,
    spec,
    *,
    power_of=None,
    cache=None,
    progress=None,
):
    """Exposure of the timeline.

    Each hologram is one (lazily read) map at 1 mW; every pulse carries its
    frame's laser power (or ``power_of(frame)``) as its scale, so frames of one
    hologram at any powers share one map and the maps are read one at a time.
    ``progress`` is called once per disc map computed.
    """
    if which == "hologram":
        check_exposure_supported(spec)
    pulses_of: dict[int, list] = {}
    by_index = {p.hologram_index: p for p in plans.values()}
    for fr in exposed_frames(frames):
        power = fr.power_mw if power_of is None else power_of(fr)
        if power is None:
            continue
        k = np.float64(power / REFERENCE_POWER_MW)
        pulses_of.setdefault(fr.hologram_index, []).extend(
            replace(p, scale=p.scale * float(k)) for p in fr.pulses
        )
    if not pulses_of:
        return None
    xframes = []
    margin = 0
    exposure_map = exposure_maps(spec)
    for hi, pulses in pulses_of.items():
        sp = by_index[hi]
        grid = sp.grid
        if which == "hologram":
            margin = orders_margin(grid)
            grid = RetinalGrid(
                (grid.rows + 2 * margin, grid.cols + 2 * margin), grid.pitch_x_um, grid.pitch_y_um
            )

        def load(sp=sp, margin=margin):
            if which == "mask":
                return sp.mask_prediction.irradiance_mw_per_mm2
            return with_higher_orders(
                exposure_map(sp), sp.grid, spec.system.slm.fill_factor, margin
            )[0]

        xframes.append(
            Frame(
                load, tuple(sorted(pulses, key=lambda p: p.start_ms)), sp.name, key=f"{which}-{hi}"
            )
        )
    # the limits go to the retina with the transmission the prediction used, so it cancels
    eye = EyeModel(
        transmission=spec.system.eye.transmission,
        source="f = 17 mm; τ = the planned eye's transmission, as in the prediction",
    )
    result = assess_sequence(
        xframes,
        grid,
        wavelength_nm,
        eye=eye,
        protocol=spec.protocol,
        subject=spec.system.eye.name,
        maxima_cache=cache,
        progress=progress,
    )
    if which == "hologram" and result is not None:
        result = replace(result, notes=(*result.notes, *exposure_map_notes(spec)))
    return result


def check_exposure_supported(spec) -> None:
    """Refuse a plan whose exposure the estimate cannot bound.

    With pixel crosstalk (``slm.fringing_um > 0``) the central order is
    predicted with the fringed pixels, but the neighbouring orders the
    estimate adds around it (:func:`with_higher_orders`) follow the ideal
    pixel's envelope, which is not shown to bound the fringed pixels' light.
    """
    w = getattr(spec.system.slm, "fringing_um", 0.0)
    if w > 0.0:
        raise ConfigError(
            "optics.slm.fringing_um",
            w,
            "0 for a plan (its exposure estimate)",
            "with pixel crosstalk the light of the neighbouring diffraction orders is not "
            "bounded by the estimate; predict the fringed pattern with "
            "stimplan.holography.propagation.predict_retina, and plan with 0",
        )


def _reference_system(spec):
    ill = replace(spec.system.illumination, power_mw=REFERENCE_POWER_MW)
    return replace(spec.system, illumination=ill)


def exposure_maps(spec):
    """The function that gives a hologram's map for the exposure estimate (at 1 mW).

    It is the plan's prediction, raised where the prediction shows a mean:

    * with a source blur (``m_squared`` or a fibre), the map is predicted again
      without it: a blurred map holds less in every disc than the unblurred
      one, so an overstated blur cannot lower the figure;
    * the coherent share of the zero order
      (:attr:`~stimplan.optics.system.OpticalSystem.coherent_zero_share`) is
      added at its worst phase (:func:`coherent_zero_order_bound`), with the
      zero order's own map computed once.
    """
    system = _reference_system(spec)
    blurred = system.source_blur().active
    share = system.coherent_zero_share
    zero: list = []

    def exposure_map(sp):
        if blurred:
            pred = sp.hologram.predict(system, oversample=spec.oversample, source_blur=False)
            irr = pred.irradiance_mw_per_mm2
        else:
            irr = sp.prediction.irradiance_mw_per_mm2
        if share > 0.0:
            if not zero:
                zero.append(
                    zero_order_irradiance(system, oversample=spec.oversample, source_blur=False)
                )
            irr = coherent_zero_order_bound(irr, zero[0], share)
        return irr

    return exposure_map


def exposure_map_notes(spec) -> tuple[str, ...]:
    """What :func:`exposure_maps` raised, in words, for the estimate's notes."""
    system = spec.system
    notes = []
    share = system.coherent_zero_share
    if share > 0.0:
        notes.append(
            f"The zero order ({system.unmodulated_fraction:.2%} of the light on the SLM) is "
            f"taken as {share:.0%} coherent with the pattern at its worst phase: "
            "I_mod + I_zero + 2 sqrt(c I_mod I_zero) at every place, above the mean the "
            "map shows (set [optics.slm] zero_order_incoherent_share from a measurement)."
        )
    if system.source_blur().active:
        notes.append(
            "The source's blur is left out of the exposure maps (a blurred map holds less "
            "in every disc): the estimate is that of a single-mode source of the same power."
        )
    return tuple(notes)


def orders_margin(grid) -> int:
    """Samples of neighbouring diffraction orders to add around a map for the exposure.

    The largest acceptance disc (alpha = 100 mrad through the reference eye) centred
    anywhere on the predicted field must see the light next to it; at most one
    whole order on each side.
    """
    radius_um = retinal_image_diameter_um(100.0) / 2.0
    m = int(np.ceil(radius_um / min(grid.pitch_x_um, grid.pitch_y_um)))
    return min(m, grid.rows, grid.cols)


def with_orders_note(assessment, holograms):
    """Say how the light of the higher diffraction orders is counted."""
    if assessment is None or not holograms:
        return assessment
    frac = max(
        sp.prediction_account.higher_orders_mw / sp.prediction_account.input_mw for sp in holograms
    )
    g = holograms[0].grid
    margin_um = orders_margin(g) * min(g.pitch_x_um, g.pitch_y_um)
    note = (
        f"Light diffracted into higher orders of the SLM pixel grid (up to {frac:.1%} of the "
        f"laser power here) is included as the neighbouring orders within {margin_um:.0f} um "
        "of the predicted field (the map wrapped, times the pixel envelope); orders further "
        "out are not evaluated."
    )
    return replace(assessment, notes=(*assessment.notes, note))


def hologram_changes(frames) -> int:
    """How often the hologram under the pulses changes: between consecutive exposed frames."""
    shown = [fr.hologram_index for fr in exposed_frames(frames)]
    return sum(1 for a, b in zip(shown, shown[1:], strict=False) if a != b)


def with_settling_note(assessment, spec, frames):
    """Say when pulses were not checked against the SLM's settling (``slm_settle_ms = 0``)."""
    if assessment is None or spec.timing.slm_settle_ms > 0:
        return assessment
    n = hologram_changes(frames)
    if n == 0:
        return assessment
    note = (
        f"Hologram changes between pulses: {n}. [timing] slm_settle_ms is 0, so the "
        "pulses were not checked against the SLM's settling. A pulse during a change shows "
        "a mixture of two holograms, which this estimate does not cover; set the settling "
        "time measured on your SLM."
    )
    return replace(assessment, notes=(*assessment.notes, note))

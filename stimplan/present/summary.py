"""One summary of a plan: the `check --json` figures and the table the CLI prints.

Every exposure figure travels with the cautions text.
"""

from __future__ import annotations

import sys

from .. import __version__
from ..baseline import MASK_PRESET_INFO
from ..budget import BUDGET_LABELS
from ..cautions import CAUTIONS
from ..errors import ConfigError
from ..implant import implant_view, stimulation_threshold
from ..legibility import legibility
from ..plan import REFERENCE_POWER_MW
from ..plan.evaluate import (
    mask_exposure,
    max_laser_power_mw,
    stimulus_exposures,
    stimulus_tolerances,
)
from .export import json_safe

__all__ = [
    "stimulus_rows",
    "plan_summary",
    "print_table",
    "budget_text",
    "source_entry",
    "source_text",
    "mask_entry",
    "stimulus_pulse_ms",
    "stimulus_view",
    "view_entry",
    "view_text",
    "tolerance_entry",
    "tolerance_text",
]


def stimulus_pulse_ms(plan, sp) -> float | None:
    """The pulse width of the first lit frame that shows the stimulus, ms (None if none
    does): the frame whose laser power the summary's figures use."""
    for f in plan.frames:
        if f.hologram_index == sp.hologram_index and f.lit:
            return float(f.pulse_ms)
    return None


def stimulus_view(plan, sp, power_mw: float, pulse_ms: float | None = None):
    """The implant's view of one stimulus at ``power_mw`` of laser power.

    Parameters
    ----------
    plan, sp
        The plan and the stimulus's plan.
    power_mw : float
        Laser power, mW.
    pulse_ms : float, optional
        Pulse width for a strength–duration threshold; by default that of the
        first lit frame showing the stimulus (:func:`stimulus_pulse_ms`).

    Returns
    -------
    ImplantView or None
        None without an implant readout.

    Raises
    ------
    ConfigError
        When the implant has no threshold (no sourced one, none given), or its
        strength–duration curve does not hold at the pulse width.
    """
    implant = plan.spec.implant
    if implant is None or sp.readout is None or sp.on is None:
        return None
    if pulse_ms is None:
        pulse_ms = stimulus_pulse_ms(plan, sp)
    threshold = stimulation_threshold(implant, pulse_ms=pulse_ms)
    return implant_view(sp.readout, sp.on, threshold=threshold, scale=power_mw / REFERENCE_POWER_MW)


def view_entry(plan, sp, power_mw: float) -> dict | None:
    """The `check --json` entry of the implant's view (at the entry's laser power and
    the pulse width of the same frame), or the reason it is refused."""
    if power_mw <= 0:
        return None
    try:
        view = stimulus_view(plan, sp, power_mw)
    except ConfigError as exc:
        return {"threshold_mw_per_mm2": None, "refused": str(exc)}
    return None if view is None else {"laser_power_mw": power_mw, **view.as_dict()}


def tolerance_entry(plan, sp, power_mw: float) -> dict | None:
    """The `check --json` entry of the tolerance analysis at the entry's laser power
    (None without ``[tolerance]``, an implant, ON pixels or a lit frame)."""
    if power_mw <= 0:
        return None
    res = stimulus_tolerances(plan).get(sp.hologram_index)
    if res is None:
        return None
    k = power_mw / REFERENCE_POWER_MW

    def case(c):
        if c is None:
            return None
        d = c.as_dict()
        d["on_min_uw"] *= k
        d["off_max_uw"] *= k
        return d

    return {
        "laser_power_mw": power_mw,
        "ranges": res.ranges.to_dict(),
        "cases": len(res.cases),
        "nominal": case(res.nominal),
        "worst_on": case(res.worst_on),
        "worst_off": case(res.worst_off),
        "on_retained": res.on_retained,
    }


def _case_text(c: dict) -> str:
    parts = [
        f"{label} {c[key]:+.3g} {unit}"
        for key, label, unit in (
            ("defocus_d", "defocus", "D"),
            ("depth_um", "depth", "µm"),
            ("cylinder_d", "cylinder", "D"),
        )
        if c[key]
    ]
    if c["cylinder_d"]:
        parts[-1] += f" at {c['cylinder_axis_deg']:g}°"
    if c["shift_x_um"] or c["shift_y_um"]:
        parts.append(f"shift ({c['shift_x_um']:+.3g}, {c['shift_y_um']:+.3g}) µm")
    if c["magnification_error"]:
        parts.append(f"scale {c['magnification_error']:+.1%}")
    return ", ".join(parts) or "in focus, as placed"


def tolerance_text(entry: dict | None) -> str:
    """One line of the tolerance entry: the worst ON and OFF pixels and where."""
    if entry is None:
        return "none (no [tolerance], implant or lit frame)"
    n, w, o = entry["nominal"], entry["worst_on"], entry["worst_off"]
    text = (
        f"worst ON pixel {w['on_min_uw']:.3g} µW ({entry['on_retained']:.0%} of "
        f"{n['on_min_uw']:.3g} µW in focus) at {_case_text(w)}"
    )
    if o is not None:
        text += (
            f"; worst OFF pixel {o['off_max_uw']:.3g} µW ({n['off_max_uw']:.3g} µW in focus) "
            f"at {_case_text(o)}"
        )
    return text + f"; {entry['cases']} cases at {entry['laser_power_mw']:.3g} mW"


def stimulus_rows(plan) -> list[dict]:
    """One summary dict per distinct stimulus (the `check --json` entries)."""
    rows = []
    for sp in plan.holograms:
        frames = [f for f in plan.frames if f.hologram_index == sp.hologram_index and f.lit]
        names = sorted({f.stimulus for f in frames}) or [sp.name]
        power = frames[0].power_mw if frames else 0.0
        h, m = sp.hologram_figures, sp.mask_figures
        exp = stimulus_exposures(plan).get(sp.hologram_index)
        first = frames[0] if frames else None
        stim = plan.spec.stimuli.get(names[0])
        implant = plan.spec.implant
        leg = (
            None
            if stim is None or implant is None
            else legibility(
                stim,
                implant.pitch_um,
                name=names[0],
                implant=implant,
                threshold=plan.spec.on_threshold,
            )
        )
        rows.append(
            {
                "name": names[0],
                "names": names,
                "hologram_index": sp.hologram_index,
                "laser_power_mw": power,
                "mask_laser_power_mw": None if first is None else plan.mask_power_for(first),
                "efficiency": sp.metrics.efficiency,
                "uniformity": sp.metrics.uniformity,
                "on_pixel_power_uw": {
                    "hologram": None if h is None else h.on_power_uw * power,
                    "mask": None if m is None else m.on_power_uw * power,
                },
                "on_pixel_cv": None if h is None else h.on_cv,
                # hologram over mask ON-pixel power = efficiency x area x coverage
                "gain_factors": None if sp.gain is None else sp.gain.as_dict(),
                "gain_over_mask": None if sp.gain is None else sp.gain.ratio,
                # laser to photodiodes at this stimulus's power (entries sum to laser_mw)
                "light_budget": None
                if sp.budget is None or power <= 0
                else sp.budget.scaled(power / REFERENCE_POWER_MW).as_dict(),
                "exposure_ratio": None if exp is None else exp.worst_ratio,
                "verdict": None if exp is None else exp.verdict,
                "finest_detail_um": None if leg is None else leg.detail_um,
                "resolvable": None if leg is None else leg.resolvable,
                "rendered": None if leg is None else leg.rendered,
                "warnings": [] if leg is None else list(leg.warnings),
                # each pixel's photodiode irradiance against the implant's threshold range
                "implant_view": view_entry(plan, sp, power),
                # per-pixel powers over the [tolerance] ranges (defocus, shift, ...)
                "tolerance": tolerance_entry(plan, sp, power),
            }
        )
    return rows


def plan_summary(plan) -> dict:
    """Everything `check --json` prints."""
    e = plan.exposure
    mask = mask_exposure(plan)
    mask_eq = mask_exposure(plan, equal_irradiance=True)
    system = plan.spec.system
    out = {
        "title": plan.spec.title,
        "stimplan_version": __version__,
        "seed": plan.seed,
        "n_frames": len(plan.frames),
        "duration_ms": plan.duration_ms,
        "stimuli": stimulus_rows(plan),
        "exposure": {
            "verdict": plan.verdict,
            "worst_ratio": 0.0 if e is None else e.worst_ratio,
            "found_ratio": None if e is None else e.found_ratio,
            "protocol_ratio": None if e is None else e.protocol_ratio,
            "binding_limit": None if e is None else e.binding_limit,
            "binding": None if e is None else e.binding_text(),
            "binding_rule": None if e is None else e.binding_rule,
            "verdict_standard": "within" if e is None else e.verdict_standard,
            "rules": {} if e is None else {r: res.ratio for r, res in e.rules.items()},
            "margin": None if e is None else e.margin,
            "edition": None if e is None else e.edition,
            "protocol": None
            if e is None or e.protocol is None
            else {
                "worst_ratio": e.protocol.worst_ratio,
                "verdict": e.protocol.verdict,
                "cap": e.protocol.describe(),
            },
            "mask_worst_ratio": None if mask is None else mask.worst_ratio,
            "mask_equal_irradiance_worst_ratio": None if mask_eq is None else mask_eq.worst_ratio,
            "max_peak_frame_power_mw": {
                "hologram": max_laser_power_mw(plan, "hologram"),
                "mask": max_laser_power_mw(plan, "mask"),
            },
        },
        "mask": mask_entry(plan.spec.mask),
        "beam": {
            "at_pupil_mm": system.beam_diameter_at_pupil_mm,
            "pupil_mm": system.eye.pupil_diameter_mm,
            "overfills_pupil": system.overfills_pupil,
        },
        "source_and_losses": source_entry(system),
        "cautions": CAUTIONS,
    }
    return json_safe(out)


def mask_entry(mask) -> dict:
    """The mask compared against: its figures, and its preset's sources if it is one."""
    preset = MASK_PRESET_INFO.get(mask.kind)
    same = preset is not None and preset.mask == mask
    return {
        "kind": mask.kind,
        "efficiency": mask.efficiency,
        "contrast_ratio": mask.contrast_ratio,
        "preset": preset.describe() if same else None,
    }


def source_entry(system) -> dict:
    """The source model and the bench's losses, as figures (shares of the light)."""
    ill, blur = system.illumination, system.source_blur()
    return {
        "degree_of_polarisation": ill.degree_of_polarisation,
        "polarisation_angle_deg": ill.polarisation_angle_deg,
        "modulated_share": ill.modulated_share,
        "unmodulated_fraction": system.unmodulated_fraction,
        "slm_reflectance": system.slm.reflectance,
        "relay_transmission": system.relay.transmission,
        "eye_transmission": system.eye.transmission,
        "eye_transmission_basis": system.eye.transmission_basis,
        "source_blur": blur.describe(),
        "source_blur_rms_um": blur.rms_width_um,
        "note": source_note(system),
    }


def source_note(system) -> str | None:
    """What the exposure figures take from the bench model, when it is not the ideal one."""
    parts = []
    if system.optics_transmission < 1.0:
        parts.append(
            f"the SLM's reflectance and the relay's transmission pass "
            f"{system.optics_transmission:.3g} of the light to the eye: this lowers the "
            "exposure figures, which rest on it; check it against the power measured at the eye"
        )
    if system.source_blur().active:
        parts.append(
            "the source's blur spreads the retinal map shown; the exposure figures leave it "
            "out (a single-mode source of the same power), so it cannot lower them"
        )
    return "; ".join(parts) if parts else None


def source_text(system) -> str:
    """One line: the source model and the loss chain's factors."""
    e = source_entry(system)
    return (
        f"modulated polarisation {e['modulated_share']:.1%} (degree of polarisation "
        f"{e['degree_of_polarisation']:g}, {e['polarisation_angle_deg']:g}° to the director), "
        f"unmodulated {e['unmodulated_fraction']:.1%}; SLM reflectance {e['slm_reflectance']:g}, "
        f"relay transmission {e['relay_transmission']:g}, ocular transmission "
        f"{e['eye_transmission']:.3g} ({e['eye_transmission_basis']}); "
        f"source blur: {e['source_blur']}" + (f" ({e['note']})" if e["note"] else "")
    )


def budget_text(budget: dict) -> str:
    """One line: the laser power, each entry's share and the ON photodiodes' shares."""
    laser = budget["laser_mw"]
    parts = [f"{BUDGET_LABELS[k]} {budget[k] / laser:.1%}" for k in BUDGET_LABELS]
    return (
        f"laser {laser:.3g} mW -> "
        + ", ".join(parts)
        + f"; ON photodiodes {budget['on_share_of_laser']:.1%} of the laser, "
        f"{budget['on_share_of_deliverable']:.1%} of the deliverable "
        f"{budget['deliverable_mw']:.3g} mW (zero order {budget['zero_order_mw'] / laser:.2%}"
        + (
            f", of which the unmodulated polarisation {budget['cross_polarised_mw'] / laser:.2%}"
            if budget.get("cross_polarised_mw", 0.0) > 0
            else ""
        )
        + f", quantisation noise {budget['quantisation_noise_mw'] / laser:.2%}, both on the retina)"
        + (
            f"; fringing crosstalk moved {budget['crosstalk_mw'] / laser:.2%} of the laser "
            "off the lit region"
            if budget.get("crosstalk_mw", 0.0) != 0.0
            else ""
        )
    )


def view_text(entry: dict | None) -> str:
    """One line of the implant's view entry (its counts, or why there is none)."""
    if entry is None:
        return "none (no implant or no lit frame)"
    if entry["threshold_mw_per_mm2"] is None:
        return "refused: " + entry["refused"]
    lo, hi = entry["threshold_mw_per_mm2"]
    pulse = entry.get("pulse_ms")
    at = "" if pulse is None else f" (the curve at {pulse:g} ms pulses)"
    text = (
        f"{entry['on_below']} of {entry['on_pixels']} ON pixels under {hi:.3g} mW/mm²{at} "
        f"(may not stimulate), {entry['off_above']} of {entry['off_pixels']} OFF pixels over "
        f"{lo:.3g} mW/mm² (may stimulate) at {entry['laser_power_mw']:.3g} mW; "
        f"threshold from {entry['source']}"
    )
    cur = entry.get("photocurrent_ua")
    if cur is not None and cur["on_min"] is not None:
        text += (
            f"; dimmest ON pixel {cur['on_min']:.3g} µA ({entry['responsivity_a_per_w']:.3g} A/W, "
            f"{entry['responsivity']}, {entry['diodes_in_series']} diode(s) in series)"
        )
    return text


def _num(x):
    return float(x) if isinstance(x, str) else x


def _fmt(x, spec=".3g") -> str:
    return "-" if x is None else format(x, spec)


def print_table(plan, file=None) -> None:
    """The summary table of a plan, with the cautions."""
    file = sys.stdout if file is None else file

    s = plan_summary(plan)
    print(f"{s['title']}  ({s['n_frames']} frames, {s['duration_ms'] / 1e3:.1f} s)", file=file)
    head = (
        f"{'stimulus':<22}{'laser mW':>9}{'effic.':>8}{'ON µW holo':>12}{'ON µW mask':>12}"
        f"{'ON CV':>8}{'exposure':>10}  verdict"
    )
    print(head, file=file)
    print("-" * len(head), file=file)
    for r in s["stimuli"]:
        print(
            f"{r['name'][:21]:<22}{r['laser_power_mw']:>9.3g}{r['efficiency']:>8.3f}"
            f"{_fmt(r['on_pixel_power_uw']['hologram']):>12}"
            f"{_fmt(r['on_pixel_power_uw']['mask']):>12}{_fmt(r['on_pixel_cv'], '.3f'):>8}"
            f"{_fmt(r['exposure_ratio']):>10}  {r['verdict'] or '-'}",
            file=file,
        )
    e = s["exposure"]
    mp = e["max_peak_frame_power_mw"]
    needs = ", ".join(
        f"{r['name']} {_fmt(r['mask_laser_power_mw'])} mW"
        for r in s["stimuli"]
        if r["mask_laser_power_mw"] is not None
    )
    compare = (
        f"the mask needs {needs} for the same ON-pixel irradiance"
        if needs
        else "no mask comparison (it needs an [implant] with ON pixels)"
    )
    print(
        f"power planning: {compare}; largest peak frame power within every limit: "
        f"hologram {_fmt(_num(mp['hologram']))} mW, mask {_fmt(_num(mp['mask']))} mW",
        file=file,
    )
    line = (
        f"sequence exposure: standard {_fmt(e['worst_ratio'])} of the limit at most "
        f"({e['binding_rule'] or '-'})"
    )
    if e["protocol"]:
        line += f"; protocol cap {e['protocol']['worst_ratio']:.3g} ({e['protocol']['verdict']})"
    line += f"; verdict: {e['verdict']}"
    print(line, file=file)
    if e["binding"]:
        print(f"what binds: {e['binding']}", file=file)
    if e["mask_equal_irradiance_worst_ratio"] is not None:
        print(
            f"the mask, for the same ON-pixel irradiance: "
            f"{e['mask_equal_irradiance_worst_ratio']:.3g} of the limit",
            file=file,
        )
    for sp in plan.holograms:
        if sp.gain is not None:
            print(f"gain over the mask, {sp.name}: {sp.gain.describe()}", file=file)
    m = s["mask"]
    print(
        "mask compared against: "
        + (m["preset"] or f"{m['kind']}, efficiency {m['efficiency']:.3g}, custom figures"),
        file=file,
    )
    print(f"source and loss chain: {source_text(plan.spec.system)}", file=file)
    for r in s["stimuli"]:
        if r["light_budget"] is not None:
            print(f"light budget, {r['name']}: {budget_text(r['light_budget'])}", file=file)
    for r in s["stimuli"]:
        for w in r["warnings"]:
            print(f"legibility: {w}", file=file)
    for r in s["stimuli"]:
        print(f"implant's view, {r['name']}: {view_text(r['implant_view'])}", file=file)
    for r in s["stimuli"]:
        if r["tolerance"] is not None:
            print(f"tolerance, {r['name']}: {tolerance_text(r['tolerance'])}", file=file)
    if e["edition"]:
        print(f"limits: {e['edition']}", file=file)
    print("CAUTION: " + CAUTIONS, file=file)

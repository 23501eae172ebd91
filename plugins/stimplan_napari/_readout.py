"""Exposure and efficiency figures of a plan, as the readout panel shows them (no Qt).

Every text here that carries an exposure figure carries the cautions
(:data:`stimplan.cautions.CAUTIONS` or, in one-line warnings,
:data:`stimplan.cautions.CAUTION_SHORT`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from napari.utils.notifications import show_warning

from stimplan.cautions import CAUTION_SHORT, CAUTIONS
from stimplan.plan.evaluate import stimulus_exposures
from stimplan.present.summary import plan_summary, source_text, tolerance_text, view_text

from ._layers import EXPORT_KEY

__all__ = [
    "StimulusFigures",
    "Readout",
    "readout_from_plan",
    "readout_text",
    "readout_table",
    "TABLE_COLUMNS",
    "verdict_line",
    "export_text",
    "plan_alerts",
    "announce",
    "announce_export",
]

_RULE_NAMES = {
    "single_pulse": "single pulse",
    "average_power": "average power",
    "repeated_pulse": "repeated pulse (C_P)",
}


@dataclass(frozen=True)
class StimulusFigures:
    """Figures of one distinct stimulus at the power of its first lit frame.

    Attributes
    ----------
    name : str
    laser_power_mw : float
    efficiency : float
        Fraction of the laser power on the lit target region.
    on_power_uw, mask_on_power_uw : float or None
        Mean power per ON implant pixel, hologram and amplitude mask, µW.
    exposure_ratio : float or None
        Worst exposure/limit ratio of this stimulus's frames alone.
    verdict : str or None
    warnings : tuple of str
        Legibility warnings.
    implant_view : str
        The implant's view: ON pixels under and OFF pixels over the threshold range,
        or why there is none (:func:`stimplan.present.summary.view_text`).
    tolerance : str
        The worst ON and OFF pixels over the tolerance ranges, or "-" without
        ranges (:func:`stimplan.present.summary.tolerance_text`).
    """

    name: str
    laser_power_mw: float
    efficiency: float
    on_power_uw: float | None
    mask_on_power_uw: float | None
    exposure_ratio: float | None
    verdict: str | None
    warnings: tuple[str, ...] = ()
    implant_view: str = "-"
    tolerance: str = "-"

    @property
    def gain_over_mask(self) -> float | None:
        """ON-pixel power of the hologram over that of the mask."""
        if not self.on_power_uw or not self.mask_on_power_uw:
            return None
        return self.on_power_uw / self.mask_on_power_uw


@dataclass(frozen=True)
class Readout:
    """What the exposure-and-efficiency panel shows for a plan.

    Attributes
    ----------
    title : str
    stimuli : tuple of StimulusFigures
    rule_ratios : dict of str to float
        Exposure/limit ratio of each rule of the standard (empty if nothing is lit).
    worst_ratio : float
        Worst ratio of the standard (0 if nothing is lit).
    binding_rule : str or None
    verdict_standard : str
        ``"within"`` or ``"above"`` the standard's limit.
    protocol : str or None
        The protocol cap's line, if the sequence has one.
    protocol_ratio : float or None
        Worst ratio to the protocol cap.
    verdict : str
        ``"within"`` or ``"above"`` (standard or protocol cap).
    binding : str or None
        Which limit binds, its ratio and the figure that decides.
    beam_at_pupil_mm, pupil_mm : float
    overfills_pupil : bool
    loss_chain : str
        The source model and the bench's losses in one line
        (:func:`stimplan.present.summary.source_text`).
    cautions : str
    """

    title: str
    stimuli: tuple[StimulusFigures, ...]
    rule_ratios: dict[str, float]
    worst_ratio: float
    binding_rule: str | None
    verdict_standard: str
    protocol: str | None
    protocol_ratio: float | None
    verdict: str
    beam_at_pupil_mm: float
    pupil_mm: float
    overfills_pupil: bool
    binding: str | None = None
    loss_chain: str = ""
    cautions: str = field(default=CAUTIONS, repr=False)


def readout_from_plan(plan, title: str | None = None) -> Readout:
    """The figures of a plan.

    Parameters
    ----------
    plan : Plan
    title : str, optional
        Default: the sequence's title.

    Returns
    -------
    Readout
    """
    # the one summary of a plan: the CLI's table and `check --json` print the same figures
    summary = plan_summary(plan)
    rows = [
        StimulusFigures(
            name=row["name"],
            laser_power_mw=row["laser_power_mw"],
            efficiency=float(row["efficiency"]),
            on_power_uw=row["on_pixel_power_uw"]["hologram"],
            mask_on_power_uw=row["on_pixel_power_uw"]["mask"],
            exposure_ratio=row["exposure_ratio"],
            verdict=row["verdict"],
            warnings=tuple(row["warnings"]),
            implant_view=view_text(row["implant_view"]),
            tolerance="-" if row["tolerance"] is None else tolerance_text(row["tolerance"]),
        )
        for row in summary["stimuli"]
    ]
    e, beam = summary["exposure"], summary["beam"]
    protocol = e["protocol"]
    return Readout(
        title=title or summary["title"],
        stimuli=tuple(rows),
        rule_ratios={rule: float(ratio) for rule, ratio in e["rules"].items()},
        worst_ratio=float(e["worst_ratio"]),
        binding_rule=e["binding_rule"],
        verdict_standard=e["verdict_standard"],
        protocol=None if protocol is None else protocol["cap"],
        protocol_ratio=None if protocol is None else float(protocol["worst_ratio"]),
        verdict=e["verdict"],
        beam_at_pupil_mm=beam["at_pupil_mm"],
        pupil_mm=beam["pupil_mm"],
        overfills_pupil=beam["overfills_pupil"],
        binding=e["binding"],
        loss_chain=source_text(plan.spec.system),
    )


def _g(x: float | str | None, spec: str = ".3g") -> str:
    if isinstance(x, str):  # JSON-safe infinities ("inf") as the summary writes them
        x = float(x)
    if x is None or math.isnan(x):
        return "-"
    return format(x, spec)


#: Columns of the per-stimulus table, with their units.
TABLE_COLUMNS = (
    "stimulus",
    "laser (mW)",
    "efficiency",
    "ON pixel, hologram (µW)",
    "ON pixel, mask (µW)",
    "gain over mask",
    "exposure / limit",
    "verdict",
    "legibility",
    "implant's view",
    "tolerance",
)


def readout_table(r: Readout | None) -> tuple[tuple[str, ...], list[list[str]]]:
    """The per-stimulus figures as table columns and rows of text (no rows for ``None``)."""
    rows = []
    for s in () if r is None else r.stimuli:
        gain = s.gain_over_mask
        rows.append(
            [
                s.name,
                _g(s.laser_power_mw),
                _g(s.efficiency, ".3f"),
                _g(s.on_power_uw),
                _g(s.mask_on_power_uw),
                "-" if gain is None else f"{gain:.3g}×",
                _g(s.exposure_ratio),
                s.verdict or "-",
                "; ".join(s.warnings) or "ok",
                s.implant_view,
                s.tolerance,
            ]
        )
    return TABLE_COLUMNS, rows


def readout_text(r: Readout, *, stimuli: bool = True) -> str:
    """The readout as plain text, ending with the cautions.

    With ``stimuli=False`` the per-stimulus lines are left out (the panel
    shows them as a table).
    """
    lines = [r.title, ""]
    if stimuli:
        lines.append(
            "stimulus: laser mW | efficiency | ON pixel µW hologram / mask (gain) | exposure"
        )
        for s in r.stimuli:
            gain = s.gain_over_mask
            lines.append(
                f"{s.name}: {_g(s.laser_power_mw)} mW | {_g(s.efficiency, '.3f')} | "
                f"{_g(s.on_power_uw)} / {_g(s.mask_on_power_uw)} µW"
                f"{'' if gain is None else f' ({gain:.3g}x)'} | "
                f"{_g(s.exposure_ratio)} of the limit, {s.verdict or '-'}"
            )
            lines += [f"  legibility: {w}" for w in s.warnings]
            lines.append(f"  implant's view: {s.implant_view}")
            if s.tolerance != "-":
                lines.append(f"  tolerance: {s.tolerance}")
        lines.append("")
    lines.append("exposure of the whole sequence (ratio to the limit of each rule):")
    if not r.rule_ratios:
        lines.append("  nothing is lit")
    for rule, ratio in r.rule_ratios.items():
        mark = "  <- binding" if rule == r.binding_rule else ""
        lines.append(f"  {_RULE_NAMES.get(rule, rule)}: {ratio:.3g}{mark}")
    if r.protocol:
        lines.append("  " + r.protocol)
    lines.append(
        f"standard: worst {r.worst_ratio:.3g} of the limit, {r.verdict_standard} the limit"
    )
    if r.protocol_ratio is not None:
        lines.append(f"protocol cap: worst {r.protocol_ratio:.3g} of the cap")
    if r.binding:
        lines.append(f"what binds: {r.binding}")
    lines.append(f"verdict: {r.verdict} the limit")
    pupil = "OVERFILLS" if r.overfills_pupil else "fits"
    lines.append(
        f"beam at the pupil {r.beam_at_pupil_mm:.2f} mm, pupil {r.pupil_mm:.2f} mm: {pupil}"
    )
    if r.loss_chain:
        lines.append(f"source and loss chain: {r.loss_chain}")
    lines.append("")
    lines.append("Caution: " + r.cautions)
    return "\n".join(lines)


def export_text(md: dict) -> tuple[str, str]:
    """An export's recorded figures as text (ending with the cautions) and its verdict line.

    ``md`` is the metadata of an export's layer: the manifest's title,
    verdict and exposure figures, as written when the export was made.
    """
    e = md.get("exposure") or {}
    verdict = md.get("verdict", "unknown")
    lines = [
        f"export: {md.get('title') or md.get(EXPORT_KEY)}",
        f"folder: {md.get(EXPORT_KEY)}",
        "",
    ]
    if e:
        lines.append("exposure of the whole sequence when it was exported:")
        for rule, r in (e.get("rules") or {}).items():
            mark = "  <- binding" if rule == e.get("binding_rule") else ""
            lines.append(f"  {_RULE_NAMES.get(rule, rule)}: {_g(r.get('ratio'))}{mark}")
        lines.append(f"standard: worst {_g(e.get('worst_ratio'))} of the limit")
        if e.get("protocol"):
            lines.append(f"protocol cap: worst {_g(e['protocol'].get('worst_ratio'))} of the cap")
        if e.get("binding"):
            lines.append(f"what binds: {e['binding']}")
    else:
        lines.append("nothing is lit in this export")
    lines += [
        "",
        f"verdict: {verdict} the limit",
        "",
        "Caution: " + (md.get("cautions") or CAUTIONS),
    ]
    line = (
        f"verdict: {str(verdict).upper()} the limit (recorded in the export); "
        f"standard {_g(e.get('worst_ratio'))} of the limit. {CAUTION_SHORT}"
    )
    return "\n".join(lines), line


def verdict_line(r: Readout) -> str:
    """One line with the verdict, the worst ratios and the short caution."""
    text = f"verdict: {r.verdict.upper()} the limit; standard {r.worst_ratio:.3g} of the limit"
    if r.protocol_ratio is not None:
        text += f", protocol cap {r.protocol_ratio:.3g}"
    return f"{text}. {CAUTION_SHORT}"


def plan_alerts(plan, subject: str = "the sequence") -> list[str]:
    """Warnings a user must see for a plan: limits exceeded, a clipped beam.

    Parameters
    ----------
    plan : Plan
    subject : str
        What the plan is, for the messages (a sequence, or one pulsed stimulus).

    Returns
    -------
    list of str
        One message per problem: the sequence above the limit, the frames of
        each stimulus above the limit on their own, the beam overfilling the
        pupil. Exposure messages carry the short caution.
    """
    out = []
    e = plan.exposure
    if e is not None and e.verdict == "above":
        parts = []
        if e.verdict_standard == "above":
            parts.append(f"{e.worst_ratio:.3g} of the standard's limit ({e.binding_rule})")
        if e.protocol is not None and e.protocol.verdict == "above":
            parts.append(
                f"{e.protocol.worst_ratio:.3g} of the protocol cap '{e.protocol.cap.name}'"
            )
        out.append(
            f"stimplan: {subject} is above the limit: {'; '.join(parts)}; "
            f"{e.binding_text()}. {CAUTION_SHORT}"
        )
    names = {sp.hologram_index: sp for sp in plan.holograms}
    own = stimulus_exposures(plan)
    for hi, a in sorted(own.items()):
        if a.verdict == "above" and len(own) > 1:
            frames = [f.index for f in plan.frames if f.hologram_index == hi and f.lit]
            shown = ", ".join(str(i) for i in frames[:8]) + (" ..." if len(frames) > 8 else "")
            out.append(
                f"stimplan: frames {shown} ({names[hi].name}) are above the limit on their own "
                f"({a.worst_ratio:.3g} of the limit). {CAUTION_SHORT}"
            )
    s = plan.spec.system
    if s.overfills_pupil:
        out.append(
            f"stimplan: the beam at the pupil ({s.beam_diameter_at_pupil_mm:.2f} mm) overfills "
            f"the {s.eye.pupil_diameter_mm:.2f} mm pupil: light is clipped."
        )
    return out


def announce(plan, subject: str = "the sequence") -> list[str]:
    """Show :func:`plan_alerts` as napari warnings; return the messages."""
    msgs = plan_alerts(plan, subject)
    for m in msgs:
        show_warning(m)
    return msgs


def announce_export(bundle) -> list[str]:
    """Warn when an export read back was estimated above the limit (and acknowledged)."""
    if bundle.verdict != "above":
        return []
    ack = bundle.manifest.get("acknowledgement") or {}
    m = (
        f"stimplan: this export was estimated above the limit and exported with the reason "
        f"{ack.get('reason')!r} ({ack.get('user')}, {ack.get('time_utc')}). {CAUTION_SHORT}"
    )
    show_warning(m)
    return [m]

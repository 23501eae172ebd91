"""The summary report: one self-contained HTML file with the figures embedded.

For each distinct stimulus: the target, the SLM phase, the predicted retina
with the implant outline, the per-pixel power map, a histogram of ON and OFF
pixel power, a bar chart of hologram against mask, and the implant's view
(each pixel's photodiode irradiance against the implant's stimulation
threshold range, :mod:`stimplan.present.view_figure`). For the sequence: the
timeline and the exposure ratios against the limit. And the cautions, at the
top and beside every exposure figure.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
from pathlib import Path

import numpy as np

from .. import __version__
from ..atomic import atomic_file
from ..budget import BUDGET_LABELS
from ..cautions import CAUTIONS, EDITION
from ..errors import ConfigError
from ..plan.evaluate import mask_exposure, max_laser_power_mw
from .summary import (
    budget_text,
    mask_entry,
    source_text,
    stimulus_rows,
    stimulus_view,
    tolerance_text,
    view_text,
)
from .view_figure import VIEW_TITLE, view_figure

__all__ = ["render_report", "write_report"]


def _fig_to_data_uri(fig, photo: bool = False) -> str:
    """The figure as an embedded image: PNG, or JPEG for figures of noise-like images
    (an SLM phase does not compress as PNG)."""
    buf = io.BytesIO()
    if photo:
        fig.savefig(buf, format="jpeg", dpi=90, pil_kwargs={"quality": 85})
        mime = "image/jpeg"
    else:
        fig.savefig(buf, format="png", dpi=90)
        mime = "image/png"
    import matplotlib.pyplot as plt

    plt.close(fig)
    return f"data:{mime};base64," + base64.b64encode(buf.getvalue()).decode("ascii")


#: Samples per axis at most of an image drawn in the report (a panel is about 400
#: screen pixels wide at the report's 90 dpi).
DISPLAY_SAMPLES = 600


def _display(image, grid, box):
    """The part of a retinal image inside ``box`` (or all of it) and its extent, reduced
    by block means to at most :data:`DISPLAY_SAMPLES` per axis (for drawing only: every
    figure printed is computed on the full image)."""
    rows, cols = image.shape
    r0, r1, c0, c1 = 0, rows, 0, cols
    if box is not None:
        top, left = grid.index_of(box[0], box[3])
        bottom, right = grid.index_of(box[1], box[2])
        r0, r1 = max(int(np.floor(top + 0.5)), 0), min(int(np.ceil(bottom + 0.5)), rows)
        c0, c1 = max(int(np.floor(left + 0.5)), 0), min(int(np.ceil(right + 0.5)), cols)
        if r1 <= r0 or c1 <= c0:
            r0, r1, c0, c1 = 0, rows, 0, cols
    k = max(-(-(r1 - r0) // DISPLAY_SAMPLES), -(-(c1 - c0) // DISPLAY_SAMPLES), 1)
    r1, c1 = r0 + (r1 - r0) // k * k, c0 + (c1 - c0) // k * k
    part = image[r0:r1, c0:c1]
    if k > 1:
        part = part.reshape((r1 - r0) // k, k, (c1 - c0) // k, k).mean(axis=(1, 3))
    x0, y0 = grid.point_of(r0 - 0.5, c0 - 0.5)  # the outer edges of the samples kept
    x1, y1 = grid.point_of(r1 - 0.5, c1 - 0.5)
    return part, (x0, x1, y1, y0)


def _zoom_box(plan):
    """Axis limits (µm) around the implant, or the whole field."""
    imp = plan.spec.implant
    if imp is None:
        return None
    x0, x1, y0, y1 = imp.footprint_extent_um
    m = 0.15 * max(x1 - x0, y1 - y0)
    return (x0 - m, x1 + m, y0 - m, y1 + m)


def _outline(ax, plan, **kw):
    imp = plan.spec.implant
    if imp is None:
        return
    from matplotlib.collections import PolyCollection

    polys = imp.pixel_polygons_um("active")
    ax.add_collection(
        PolyCollection(polys, facecolors="none", edgecolors=kw.get("color", "c"), linewidths=0.4)
    )


#: The retina's colour scale ends at this percentile of the lit samples (speckle peaks
#: would otherwise set it, and the pattern would look dim); the true peak is printed.
COLOUR_PERCENTILE = 99.5


def _stimulus_figures(plan, sp, power_mw: float) -> list[tuple[str, str]]:
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt
    from matplotlib.collections import PolyCollection

    out = []
    box = _zoom_box(plan)
    dg = sp.target.grid
    pg = sp.prediction.grid

    fig, axes = plt.subplots(1, 3, figsize=(13, 4.2), layout="constrained")
    ax = axes[0]
    shown, ext = _display(sp.target.intensity, dg, box)
    ax.imshow(shown, extent=ext, cmap="gray", origin="upper")
    _outline(ax, plan, color="tab:orange")
    ax.set_title("target (relative)")
    ax = axes[1]
    phase = sp.hologram.phase_rad
    step = max(-(-max(phase.shape) // DISPLAY_SAMPLES), 1)  # every step-th pixel: a phase
    # is not averaged (it wraps)
    im = ax.imshow(
        phase[::step, ::step],
        cmap="twilight",
        vmin=0,
        vmax=2 * np.pi,
        extent=(-0.5, phase.shape[1] - 0.5, phase.shape[0] - 0.5, -0.5),
    )
    ax.set_title("SLM phase (rad), designed")
    ax.set_xlabel("SLM column")
    ax.set_ylabel("SLM row")
    fig.colorbar(im, ax=ax, fraction=0.046)
    ax = axes[2]
    irr = sp.prediction.irradiance_mw_per_mm2 * np.float32(power_mw)
    peak = float(irr.max())
    lit = irr[irr > 0]
    top = float(np.percentile(lit, COLOUR_PERCENTILE)) if lit.size else 1.0
    shown, ext = _display(irr, pg, box)
    im = ax.imshow(shown, extent=ext, cmap="inferno", origin="upper", vmin=0, vmax=top)
    _outline(ax, plan)
    ax.plot([0], [0], "c+", ms=10)
    ax.set_title(
        f"predicted retina at {power_mw:.3g} mW (mW/mm²)\n"
        f"colours to the {COLOUR_PERCENTILE:g}th percentile; true peak {peak:.3g}"
    )
    fig.colorbar(im, ax=ax, fraction=0.046)
    for a in (axes[0], axes[2]):
        a.set_xlabel("x (µm)")
        a.set_ylabel("y (µm)")
        if box:
            a.set_xlim(box[0], box[1])
            a.set_ylim(box[2], box[3])
    out.append(("Target, SLM phase and predicted retina", _fig_to_data_uri(fig, photo=True)))

    if sp.readout is not None and plan.spec.implant is not None:
        imp = plan.spec.implant
        p_uw = np.asarray(sp.readout.power_uw) * power_mw
        fig, axes = plt.subplots(1, 3, figsize=(13, 4.2), layout="constrained")
        ax = axes[0]
        pc = PolyCollection(
            imp.pixel_polygons_um("cell"),
            array=p_uw,
            cmap="viridis",
            edgecolors="k",
            linewidths=0.2,
        )
        ax.add_collection(pc)
        ax.autoscale_view()
        ax.set_aspect("equal")
        fig.colorbar(pc, ax=ax, fraction=0.046, label="µW")
        ax.set_title("photodiode power per pixel")
        ax.set_xlabel("x (µm)")
        ax.set_ylabel("y (µm)")
        ax = axes[1]
        on = sp.on
        bins = np.linspace(0, max(float(p_uw.max()), 1e-12) * 1.05, 40)
        ax.hist(p_uw[on], bins=bins, alpha=0.7, label=f"ON ({int(on.sum())})")
        if (~on).any():
            ax.hist(p_uw[~on], bins=bins, alpha=0.7, label=f"OFF ({int((~on).sum())})")
        ax.set_xlabel("power per pixel (µW)")
        ax.set_ylabel("pixels")
        ax.legend()
        ax.set_title("ON and OFF pixels")
        ax = axes[2]
        if sp.hologram_figures is not None:
            labels = ["hologram", sp.mask_figures.label]
            vals = [
                sp.hologram_figures.on_power_uw * power_mw,
                sp.mask_figures.on_power_uw * power_mw,
            ]
            bars = ax.bar(labels, vals, color=["tab:red", "tab:gray"])
            ax.bar_label(bars, labels=[f"{v:.3g} µW" for v in vals])
            ax.set_ylabel("mean ON-pixel power (µW)")
            ax.set_ylim(0, max(vals) * 1.15)
            ax.set_title(f"same laser power ({power_mw:.3g} mW): {vals[0] / vals[1]:.3g}×")
        out.append(("Per-pixel power", _fig_to_data_uri(fig)))
    try:
        view = stimulus_view(plan, sp, power_mw) if power_mw > 0 else None
    except ConfigError:  # no threshold range: the table row says why
        view = None
    if view is not None:
        fig = view_figure(plt, plan.spec.implant, view, power_mw=power_mw)
        out.append((VIEW_TITLE, _fig_to_data_uri(fig)))
    if sp.budget is not None and power_mw > 0:
        out.append(("Light budget", _budget_figure(plt, sp.budget.scaled(power_mw))))
    return out


def _budget_figure(plt, budget) -> str:
    """A waterfall: the laser power, each loss taken off in turn, down to the ON photodiodes."""
    entries = budget.entries()
    fig, ax = plt.subplots(figsize=(13, 3.8), layout="constrained")
    level = budget.laser_mw
    names, lefts, widths, colours = ["laser"], [0.0], [level], ["tab:blue"]
    for key, label in BUDGET_LABELS.items():
        if key == "on_photodiodes_mw":
            continue
        level -= entries[key]
        names.append(label)
        lefts.append(level)
        widths.append(entries[key])
        colours.append("tab:gray")
    names.append("ON photodiodes")
    lefts.append(0.0)
    widths.append(entries["on_photodiodes_mw"])
    colours.append("tab:red")
    y = np.arange(len(names))[::-1]
    ax.barh(y, widths, left=lefts, color=colours)
    for yy, left, w in zip(y, lefts, widths, strict=True):
        ax.text(left + w, yy, f" {w:.3g} mW ({w / budget.laser_mw:.1%})", va="center", fontsize=8)
    ax.axvline(budget.deliverable_mw, color="k", ls="--", lw=1)
    ax.text(budget.deliverable_mw, y[0] + 0.5, " deliverable", fontsize=8)
    ax.set_yticks(y, names, fontsize=8)
    ax.set_xlim(0, budget.laser_mw * 1.25)
    ax.set_xlabel("power (mW), laser to photodiodes")
    ax.set_title(
        f"light budget: {budget.on_share_of_laser:.1%} of the laser and "
        f"{budget.on_share_of_deliverable:.1%} of the deliverable light on the ON photodiodes"
    )
    return _fig_to_data_uri(fig)


def _sequence_figures(plan) -> list[tuple[str, str]]:
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    out = []
    fig, ax = plt.subplots(figsize=(13, 3.2), layout="constrained")
    names = sorted({f.stimulus for f in plan.frames if f.stimulus})
    colours = {n: plt.cm.tab10(i % 10) for i, n in enumerate(names)}
    for f in plan.frames:
        if not f.lit:
            continue
        ax.broken_barh(
            [(f.start_ms / 1e3, f.duration_ms / 1e3)],
            (0, f.power_mw),
            facecolors=colours[f.stimulus],
            alpha=0.8,
        )
    for n in names:
        ax.plot([], [], color=colours[n], lw=6, label=n)
    ax.set_xlabel("time (s)")
    ax.set_ylabel("laser power (mW)")
    ax.set_xlim(0, max(plan.duration_ms / 1e3, 1e-3))
    top = max((f.power_mw for f in plan.frames), default=1.0)
    ax.set_ylim(0, top * 1.15 if top > 0 else 1)
    ax.legend(loc="upper right", fontsize=7, ncol=4)
    ax.set_title("timeline (bars: frames, height: laser power on the SLM)")
    out.append(("Timeline", _fig_to_data_uri(fig)))

    if plan.exposure is not None:
        fig, ax = plt.subplots(figsize=(8, 3.4), layout="constrained")
        rules = list(plan.exposure.rules)
        labels = [r.replace("_", " ") for r in rules]
        x = np.arange(len(rules), dtype=float)
        vals = [max(plan.exposure.rules[r].ratio, 1e-12) for r in rules]
        ax.bar(x - 0.2, vals, 0.4, label="hologram", color="tab:red")
        mask_eq = mask_exposure(plan, equal_irradiance=True)
        if mask_eq is not None:
            mvals = [max(mask_eq.rules[r].ratio, 1e-12) for r in rules]
            ax.bar(x + 0.2, mvals, 0.4, label="mask, same ON-pixel irradiance", color="tab:gray")
        if plan.exposure.protocol is not None:
            x = np.append(x, len(rules))
            labels.append("protocol cap")
            ax.bar(
                [len(rules)],
                [max(plan.exposure.protocol.worst_ratio, 1e-12)],
                0.4,
                color="tab:purple",
                label="protocol cap (hologram)",
            )
        ax.set_xticks(x, labels)
        ax.set_yscale("log")
        ax.axhline(1.0, color="k", ls="--", lw=1)
        ax.text(0.01, 1.1, "limit", transform=ax.get_yaxis_transform())
        ax.set_ylabel("exposure / limit (log scale: ratios span decades)")
        ax.legend(fontsize=8)
        ax.set_title("exposure ratios (estimate, not a safety approval)")
        out.append(("Exposure ratios against the limit", _fig_to_data_uri(fig)))
    return out


#: Labels and units of the optical system's summary (``OpticalSystem.summary``).
SYSTEM_LABELS = {
    "sample_pitch_x_um": ("retinal sample pitch, x", "µm"),
    "sample_pitch_y_um": ("retinal sample pitch, y", "µm"),
    "field_width_um": ("retinal field width", "µm"),
    "field_width_deg": ("retinal field width", "°"),
    "max_steer_deg": ("largest steering angle", "°"),
    "beam_diameter_at_pupil_mm": ("beam diameter at the pupil", "mm"),
    "overfills_pupil": ("beam overfills the pupil", ""),
    "modulated_share": ("share in the SLM's modulated polarisation", ""),
    "unmodulated_fraction": ("unmodulated share (zero order, both polarisations)", ""),
    "optics_transmission": ("SLM reflectance × relay transmission", ""),
    "source_blur_rms_um": ("source blur on the retina, rms per axis", "µm"),
}

#: Terms the report uses, defined once (shown under the stimuli's tables).
TERMS = (
    ("efficiency", "the fraction of the laser power that lands on the lit target region"),
    (
        "uniformity",
        "1 - (max - min) / (max + min) of the irradiance averaged over each design sample, "
        "over the lit region (1 is perfectly even; Di Leonardo et al. 2007)",
    ),
    (
        "RMS error",
        "rms(k I - T) / mean(T) over the lit region dilated by two samples, k the "
        "least-squares scale of the prediction I to the target T (Fienup 1982)",
    ),
    (
        "speckle contrast",
        "σ / mean of the irradiance over the lit region at full resolution (Goodman 2007)",
    ),
    ("ON pixel", "an implant pixel whose photodiode the stimulus lights (the rest are OFF)"),
    ("CV", "coefficient of variation: standard deviation over mean, across the ON pixels"),
)


def _system_row(key: str, value) -> tuple[str, str]:
    label, unit = SYSTEM_LABELS.get(key, (key.replace("_", " "), ""))
    if isinstance(value, bool):
        return label, "yes" if value else "no"
    text = f"{value:.4g}" if isinstance(value, float) else str(value)
    return label, f"{text} {unit}".strip()


def _table(rows: list[tuple[str, str]]) -> str:
    body = "".join(f"<tr><th>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>" for k, v in rows)
    return f"<table>{body}</table>"


def render_report(plan) -> str:
    """The report as an HTML string (figures embedded as PNG data URIs)."""
    spec = plan.spec
    sysm = spec.system
    parts = [
        "<!doctype html><html><head><meta charset='utf-8'>",
        f"<title>{html.escape(spec.title)} — stimplan report</title>",
        "<style>body{font-family:sans-serif;max-width:1200px;margin:auto;padding:1em}"
        "table{border-collapse:collapse;margin:.5em 0}th,td{border:1px solid #ccc;"
        "padding:2px 8px;text-align:left}th{background:#f4f4f4}.caution{border:2px solid "
        "#c00;background:#fff4f4;padding:.6em}.warning{color:#a40;font-weight:bold}"
        "img{max-width:100%}</style></head><body>",
        f"<h1>{html.escape(spec.title)}</h1>",
        f"<p>stimplan {__version__}, seed {plan.seed}, created "
        f"{_dt.datetime.now(_dt.UTC).isoformat(timespec='seconds')}</p>",
        f"<div class='caution'><b>Caution.</b> {html.escape(CAUTIONS)}</div>",
        "<h2>Optical system</h2>",
        _table(
            [_system_row(k, v) for k, v in sysm.summary().items()]
            + [
                ("wavelength", f"{sysm.illumination.wavelength_nm:g} nm"),
                ("eye", sysm.eye.name),
                ("source and loss chain", source_text(sysm)),
                (
                    "mask compared against",
                    mask_entry(spec.mask)["preset"]
                    or f"{spec.mask.kind}, efficiency {spec.mask.efficiency:.3g} (custom)",
                ),
                (
                    "implant",
                    "none"
                    if spec.implant is None
                    else f"{spec.implant.name}, {spec.implant.n_pixels} pixels of "
                    f"{spec.implant.pitch_um:g} µm",
                ),
            ]
        ),
    ]
    parts.append("<h2>Exposure (estimate)</h2>")
    if plan.exposure is None:
        parts.append("<p>No light is shown in this sequence.</p>")
    else:
        e = plan.exposure
        rows = [
            ("edition", EDITION),
            ("verdict", e.verdict),
            (
                "worst ratio to the standard's limit (upper bound)",
                f"{e.worst_ratio:.3g} ({e.binding_rule}); found {e.found_ratio:.3g} at one place",
            ),
            ("what binds", e.binding_text()),
            ("margin", f"{e.margin:.3g}×"),
            (
                "worst place",
                f"x {e.worst.x_um:.0f} µm, y {e.worst.y_um:.0f} µm, "
                f"α {e.worst.alpha_mrad:.3g} mrad",
            ),
            ("peak retinal irradiance", f"{e.peak_irradiance_mw_per_mm2:.3g} mW/mm²"),
            ("largest dose", f"{e.max_dose_mj_per_mm2:.3g} mJ/mm²"),
            (
                "largest uniform power scaling within every limit",
                f"peak frame power {max_laser_power_mw(plan, 'hologram'):.3g} mW "
                f"(the mask at the same powers: {max_laser_power_mw(plan, 'mask'):.3g} mW)",
            ),
            ("basis", e.basis),
        ]
        if e.protocol is not None:
            rows.append(("protocol cap", e.protocol.describe()))
        mask, mask_eq = mask_exposure(plan), mask_exposure(plan, equal_irradiance=True)
        if mask is not None:
            rows.append(("mask at the same powers", f"{mask.worst_ratio:.3g} of the limit"))
        if mask_eq is not None:
            rows.append(
                (
                    "mask at the powers that give the same ON-pixel irradiance",
                    f"{mask_eq.worst_ratio:.3g} of the limit",
                )
            )
        parts.append(_table(rows))
        parts.append(f"<p class='caution'>{html.escape(e.caution)}</p>")
    for title, uri in _sequence_figures(plan):
        parts.append(f"<h3>{html.escape(title)}</h3><img src='{uri}' alt='{html.escape(title)}'>")
    parts.append("<h2>Stimuli</h2>")
    parts.append(
        "<p>" + "; ".join(f"<b>{html.escape(t)}</b>: {html.escape(d)}" for t, d in TERMS) + ".</p>"
    )
    legible = {r["hologram_index"]: r for r in stimulus_rows(plan)}
    for sp in plan.holograms:
        frames = [f for f in plan.frames if f.hologram_index == sp.hologram_index and f.lit]
        power = frames[0].power_mw if frames else 1.0
        names = sorted({f.stimulus for f in frames})
        parts.append(
            f"<h3>{html.escape(', '.join(names) or sp.name)} (hologram {sp.hologram_index})</h3>"
        )
        m = sp.metrics
        rows = [
            ("laser power of its first frame", f"{power:.4g} mW"),
            ("efficiency (fraction of laser power on the lit target)", f"{m.efficiency:.3f}"),
            ("uniformity", f"{m.uniformity:.3f}"),
            ("RMS error", f"{m.rms_error:.3f}"),
            ("speckle contrast", f"{m.speckle_contrast:.3f}"),
        ]
        if sp.hologram_figures is not None:
            h, k = sp.hologram_figures, sp.mask_figures
            first = frames[0] if frames else None
            mask_power = None if first is None else plan.mask_power_for(first)
            rows += [
                ("ON pixels", str(int(sp.on.sum()))),
                (
                    "laser power the mask needs for the same ON-pixel irradiance",
                    "-" if mask_power is None else f"{mask_power:.4g} mW",
                ),
                ("mean ON-pixel power, hologram", f"{h.on_power_uw * power:.4g} µW"),
                (f"mean ON-pixel power, {k.label}", f"{k.on_power_uw * power:.4g} µW"),
                ("ON-pixel CV, hologram", f"{h.on_cv:.3f}"),
                (
                    f"gain over the {k.label} (efficiency × area × coverage)",
                    "-" if sp.gain is None else sp.gain.describe(),
                ),
                ("ON/OFF contrast, hologram", f"{h.on_off_contrast:.3g}"),
            ]
        row = legible[sp.hologram_index]
        if row["resolvable"] is not None:
            rows.append(
                (
                    "finest detail against the pixel pitch (sampling limit)",
                    f"{row['finest_detail_um']:.3g} µm: "
                    + ("resolvable" if row["resolvable"] else "NOT resolvable")
                    + (
                        ""
                        if row["rendered"] is None
                        else "; on the array the feature is "
                        + (
                            "rendered (it changes which pixels are ON)"
                            if row["rendered"]
                            else "NOT rendered (no ON/OFF contrast)"
                        )
                    ),
                )
            )
        if row["light_budget"] is not None:
            rows.append(("light budget", budget_text(row["light_budget"])))
        if spec.implant is not None:
            rows.append(("implant's view", view_text(row["implant_view"])))
        if spec.tolerance is not None:
            rows.append(
                ("tolerance (worst pixels over the ranges)", tolerance_text(row["tolerance"]))
            )
        parts.append(_table(rows))
        for w in row["warnings"]:
            parts.append(f"<p class='warning'>{html.escape(w)}</p>")
        for title, uri in _stimulus_figures(plan, sp, power):
            parts.append(
                f"<h4>{html.escape(title)}</h4><img src='{uri}' alt='{html.escape(title)}'>"
            )
            if title == VIEW_TITLE:  # retinal irradiance: with the cautions
                parts.append(f"<p class='caution'>{html.escape(CAUTIONS)}</p>")
    parts.append(f"<div class='caution'><b>Caution.</b> {html.escape(CAUTIONS)}</div>")
    parts.append("</body></html>")
    return "\n".join(parts)


def write_report(plan, path: str | Path, *, force: bool = False) -> Path:
    """Write the report atomically; refuses to overwrite without ``force``."""
    text = render_report(plan)
    with atomic_file(path, force=force, mode="w") as fh:
        fh.write(text)
    return Path(path)

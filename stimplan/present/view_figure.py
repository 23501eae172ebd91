"""The report's figure of the implant's view: each pixel against the threshold range.

Every pixel cell is filled with its photodiode irradiance over the high end
of the implant's threshold range (log scale: the published ranges span
decades); the colour bar marks both ends (one value for a strength–duration
curve, read at the step's pulse width). ON pixels under the high end
(may not stimulate) and OFF pixels over the low end (may stimulate) get a
heavy outline of their own colour.
"""

from __future__ import annotations

import numpy as np

from ..implant import ImplantView

__all__ = ["VIEW_TITLE", "view_figure"]

#: The figure's heading in the report.
VIEW_TITLE = "The implant's view: photodiode irradiance against the stimulation threshold"

#: Outline colours of the flagged pixels.
ON_BELOW_COLOUR = "red"
OFF_ABOVE_COLOUR = "magenta"


def colour_limits(view: ImplantView) -> tuple[float, float]:
    """Limits of the log colour scale (irradiance over the high end): a decade past both
    ends of the range and past the lit pixels."""
    t = view.threshold
    rel = view.relative_to_high
    lit = rel[rel > 0]
    lo = 0.1 * t.low_mw_per_mm2 / t.high_mw_per_mm2
    hi = 10.0
    if lit.size:
        lo = min(lo, float(lit.min()))
        hi = max(hi, float(lit.max()))
    return lo, hi


def view_figure(plt, implant, view: ImplantView, *, power_mw: float):
    """The figure (a matplotlib Figure) of one stimulus's implant view.

    Parameters
    ----------
    plt : module
        ``matplotlib.pyplot`` (Agg backend chosen by the caller).
    implant : Implant
    view : ImplantView
    power_mw : float
        The laser power the view is at (for the title), mW.
    """
    from matplotlib.collections import PolyCollection
    from matplotlib.colors import LogNorm
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    t = view.threshold
    vmin, vmax = colour_limits(view)
    rel = np.clip(view.relative_to_high, vmin, vmax)
    on_below, off_above = view.on_below, view.off_above
    edges = np.where(view.on, "white", "0.4").astype(object)
    edges[on_below] = ON_BELOW_COLOUR
    edges[off_above] = OFF_ABOVE_COLOUR
    widths = np.where(on_below | off_above, 1.6, 0.3)
    fig, ax = plt.subplots(figsize=(8.5, 6.0), layout="constrained")
    pc = PolyCollection(
        implant.pixel_polygons_um("cell"),
        array=rel,
        cmap="viridis",
        norm=LogNorm(vmin=vmin, vmax=vmax),
        edgecolors=list(edges),
        linewidths=widths,
    )
    ax.add_collection(pc)
    ax.autoscale_view()
    ax.set_aspect("equal")
    ax.set_facecolor("0.85")
    bar = fig.colorbar(pc, ax=ax, fraction=0.046)
    bar.set_label("photodiode irradiance / high end of the threshold range")
    low_rel = t.low_mw_per_mm2 / t.high_mw_per_mm2
    bar.ax.axhline(1.0, color="k", lw=1.5)
    bar.ax.axhline(low_rel, color="k", lw=1.5, ls="--")
    fig.legend(
        handles=[
            Patch(
                facecolor="none",
                edgecolor=ON_BELOW_COLOUR,
                lw=1.6,
                label=f"ON under the high end, may not stimulate ({int(on_below.sum())} of "
                f"{int(view.on.sum())})",
            ),
            Patch(
                facecolor="none",
                edgecolor=OFF_ABOVE_COLOUR,
                lw=1.6,
                label=f"OFF over the low end, may stimulate ({int(off_above.sum())} of "
                f"{int((~view.on).sum())})",
            ),
            Line2D(
                [],
                [],
                color="k",
                lw=1.5,
                label=f"colour bar: high end {t.high_mw_per_mm2:.3g} mW/mm²",
            ),
            Line2D(
                [],
                [],
                color="k",
                lw=1.5,
                ls="--",
                label=f"colour bar: low end {t.low_mw_per_mm2:.3g} mW/mm²",
            ),
        ],
        loc="outside lower center",
        fontsize=8,
        ncol=2,
    )
    ax.set_xlabel("x (µm)")
    ax.set_ylabel("y (µm)")
    against = (
        f"the threshold range {t.low_mw_per_mm2:.3g}-{t.high_mw_per_mm2:.3g} mW/mm²"
        if t.pulse_ms is None
        else f"the strength–duration threshold {t.low_mw_per_mm2:.3g} mW/mm² at {t.pulse_ms:g} "
        "ms pulses"
    )
    ax.set_title(
        f"at {power_mw:.3g} mW: mean irradiance on each photodiode against {against}",
        fontsize=9,
    )
    return fig

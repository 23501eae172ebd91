"""Sample data: the built-in demo computed and shown with physical scale (µm)."""

from __future__ import annotations


def demo_retina() -> list[tuple]:
    """Target, SLM phase and predicted retinal irradiance of the quick demo, as layer tuples."""
    from stimplan.demo import demo_system, demo_target
    from stimplan.holography import IftaSettings, design_hologram

    system = demo_system(quick=True)
    target = demo_target(system)
    holo = design_hologram(target, system, IftaSettings(method="mraf", iterations=40, seed=1))
    pred = holo.predict(system)
    dg, pg = target.grid, pred.grid
    return [
        (
            target.intensity,
            {"name": "target (relative)", "scale": (dg.pitch_y_um, dg.pitch_x_um),
             "translate": dg.origin_um, "units": "um"},
            "image",
        ),
        (
            pred.irradiance_mw_per_mm2,
            {"name": "retina irradiance (mW/mm^2)", "scale": (pg.pitch_y_um, pg.pitch_x_um),
             "translate": pg.origin_um, "colormap": "inferno", "units": "um"},
            "image",
        ),
    ]

"""Layer data tuples of stimplan results, in retinal micrometres.

Pure functions, no Qt: each turns a stimplan object into napari
``(data, kwargs, layer_type)`` tuples.

Coordinates
    napari's first display axis points down, stimplan's y points up. Every
    layer here is placed so that the displayed world coordinates are
    ``(-y_um, x_um)``: images get ``scale = (pitch_y_um, pitch_x_um)`` and
    ``translate = RetinalGrid.origin_um``; shapes and points are given
    directly as ``(-y, x)`` in µm.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from stimplan.cautions import CAUTION_SHORT
from stimplan.errors import ConfigError
from stimplan.implant import implant_view, stimulation_threshold
from stimplan.plan import REFERENCE_POWER_MW

__all__ = [
    "EXPORT_KEY",
    "LAYER_NAMES",
    "PLAN_KEY",
    "RESULT_KEY",
    "grid_placement",
    "slm_placement",
    "display_yx",
    "frame_stack",
    "implant_shapes",
    "implant_view_shapes",
    "result_view",
    "zero_order_points",
    "stimulus_layers",
    "plan_frame_maps",
    "plan_layers",
    "export_layers",
]

#: Metadata key of the :class:`~stimplan.plan.Plan` behind a sequence layer.
PLAN_KEY = "stimplan_plan"
#: Metadata key of the :class:`~stimplan_napari._compute.StimulusResult` behind a layer.
RESULT_KEY = "stimplan_result"
#: Metadata key of an export folder read back (its path; the manifest's figures beside it).
EXPORT_KEY = "stimplan_export"

#: Names of the layers the plugin makes (units in the names).
LAYER_NAMES = {
    "target": "target (relative)",
    "phase": "SLM phase (rad, SLM plane)",
    "irradiance": "retina irradiance (mW/mm²)",
    "implant": "implant pixels (µW delivered)",
    "outline": "implant pixels (outline)",
    "implant_view": "implant's view (photodiode irradiance / high threshold, log10)",
    "zero_order": "zero order",
    "sequence": "sequence retina (mW/mm²)",
    "sequence_grey": "sequence SLM grey (SLM plane)",
    "export_grey": "export SLM grey (per frame)",
    "export_retina": "export retina, predicted from its grey levels (mW/mm²)",
}

TWO_PI = 2.0 * np.pi


def grid_placement(grid) -> dict[str, Any]:
    """``scale``, ``translate`` and ``units`` that put a grid's image in retinal µm.

    Parameters
    ----------
    grid : RetinalGrid

    Returns
    -------
    dict
        Keyword arguments for a napari image layer; displayed coordinates
        are ``(-y_um, x_um)``.
    """
    return {
        "scale": (grid.pitch_y_um, grid.pitch_x_um),
        "translate": tuple(float(t) for t in grid.origin_um),
        "units": ("um", "um"),
    }


def slm_placement(slm) -> dict[str, Any]:
    """``scale``/``translate`` of an SLM-plane image in SLM µm, centred on the optical axis.

    Pixel centres land where :meth:`stimplan.optics.system.SLM.pixel_coords_mm` puts
    them (displayed as ``(-y, x)``).
    """
    return _slm_plane(slm.pixels_y, slm.pixels_x, slm.pitch_um)


def _slm_plane(rows: int, cols: int, pitch_um: float) -> dict[str, Any]:
    p = float(pitch_um)
    return {
        "scale": (p, p),
        "translate": (-(rows / 2 - 0.5) * p, -(cols / 2 - 0.5) * p),
        "units": ("um", "um"),
    }


def display_yx(x_um: np.ndarray, y_um: np.ndarray) -> np.ndarray:
    """Retinal ``(x, y)`` µm to napari's displayed ``(-y, x)``, stacked on the last axis."""
    x = np.asarray(x_um, dtype=np.float64)
    y = np.asarray(y_um, dtype=np.float64)
    return np.stack([-y, x], axis=-1)


def frame_stack(
    pages: Sequence[np.ndarray],
    frame_pages: Sequence[int],
    frame_scale: Sequence[float] | None = None,
):
    """A lazy ``(n_frames, rows, cols)`` stack: frame ``k`` is ``pages[frame_pages[k]] * scale[k]``.

    Parameters
    ----------
    pages : sequence of ndarray
        The distinct maps, all of one shape (not copied).
    frame_pages : sequence of int
        Page of each frame; -1 shows zeros (a dark pause).
    frame_scale : sequence of float, optional
        Factor of each frame (e.g. its laser power in mW over the 1 mW of a
        page). Default: 1.

    Returns
    -------
    dask.array.Array
        Each frame is computed only when it is shown; 500 frames of three
        pages hold three pages in memory.
    """
    import dask.array as da

    if not len(pages):
        raise ValueError("frame_stack needs at least one page")
    shape = np.shape(pages[0])
    dtype = np.result_type(*[np.asarray(p[:1, :1]).dtype for p in pages])
    if frame_scale is not None:
        dtype = np.result_type(dtype, np.float32)
    blocks = [da.from_array(p, chunks=shape) for p in pages]
    blocks.append(da.zeros(shape, dtype=dtype, chunks=shape))
    base = da.stack(blocks)
    idx = np.asarray(frame_pages, dtype=np.int64)
    idx = np.where(idx < 0, len(pages), idx)
    stack = base[idx]
    if frame_scale is not None:
        k = np.asarray(frame_scale, dtype=np.float32).reshape(-1, 1, 1)
        stack = stack * da.from_array(k, chunks=(1, 1, 1))
    return stack


def implant_shapes(
    implant,
    power_uw: np.ndarray | None = None,
    on: np.ndarray | None = None,
    *,
    name: str | None = None,
) -> tuple:
    """The implant's photodiodes as a Shapes layer, coloured by delivered power.

    Parameters
    ----------
    implant : Implant
    power_uw : ndarray, optional
        Power on each photodiode, µW; without it only the outlines are drawn.
    on : ndarray of bool, optional
        ON pixels (a feature of the layer).
    name : str, optional

    Returns
    -------
    tuple
        ``(polygons, kwargs, "shapes")`` with coordinates ``(-y, x)`` in µm.
    """
    polys = implant.pixel_polygons_um("active")
    data = list(display_yx(polys[..., 0], polys[..., 1]))
    n = len(data)
    features: dict[str, Any] = {"pixel": np.arange(n)}
    kwargs: dict[str, Any] = {
        "shape_type": "polygon",
        "edge_width": max(implant.pitch_um * 0.03, 0.5),
        "units": ("um", "um"),
    }
    if power_uw is not None:
        p = np.asarray(power_uw, dtype=np.float64)
        features["power_uw"] = p
        top = float(p.max()) if p.size and p.max() > 0 else 1.0
        kwargs.update(
            name=name or LAYER_NAMES["implant"],
            face_color="power_uw",
            face_colormap="viridis",
            face_contrast_limits=(0.0, top),
            edge_color="white",
            opacity=0.75,
        )
    else:
        kwargs.update(
            name=name or LAYER_NAMES["outline"],
            face_color="transparent",
            edge_color="cyan",
            opacity=0.8,
        )
    if on is not None:
        features["on"] = np.asarray(on, bool)
    kwargs["features"] = features
    return (data, kwargs, "shapes")


#: Edge colours of the implant's view: ON pixels under the high end of the threshold
#: range (may not stimulate), OFF pixels over the low end (may stimulate), the others.
VIEW_EDGES = {"on_below": "red", "off_above": "magenta", "on": "white", "off": "gray"}


def result_view(result):
    """The implant's view of a computed stimulus at its laser power and pulse width, or
    None (no implant, no threshold, or a strength–duration curve that does not hold at
    the pulse width: :func:`stimplan.implant.stimulation_threshold` says why)."""
    if result.implant is None or result.readout is None or result.on is None:
        return None
    try:
        threshold = stimulation_threshold(result.implant, pulse_ms=result.request.pulse_ms)
    except ConfigError:
        return None
    k = result.power_mw / REFERENCE_POWER_MW
    return implant_view(result.readout, result.on, threshold=threshold, scale=k)


def implant_view_shapes(implant, view, *, visible: bool = False) -> tuple:
    """The implant's view as a Shapes layer: each pixel cell filled with log10 of its
    photodiode irradiance over the high end of the threshold range, flagged pixels
    outlined (:data:`VIEW_EDGES`).

    Parameters
    ----------
    implant : Implant
    view : ImplantView
    visible : bool
        Hidden at first (it covers the photodiode power layer).

    Returns
    -------
    tuple
        ``(polygons, kwargs, "shapes")`` with coordinates ``(-y, x)`` in µm; the
        features hold each pixel's irradiance (mW/mm²) and its flags, the metadata
        the range, its source and the cautions.
    """
    polys = implant.pixel_polygons_um("cell")
    data = list(display_yx(polys[..., 0], polys[..., 1]))
    t = view.threshold
    rel = view.relative_to_high
    floor = 0.1 * t.low_mw_per_mm2 / t.high_mw_per_mm2
    log_rel = np.log10(np.maximum(rel, floor))
    edges = np.where(view.on, VIEW_EDGES["on"], VIEW_EDGES["off"]).astype(object)
    edges[view.on_below] = VIEW_EDGES["on_below"]
    edges[view.off_above] = VIEW_EDGES["off_above"]
    features = {
        "pixel": np.arange(len(data)),
        "irradiance_mw_per_mm2": view.irradiance_mw_per_mm2,
        "log10_over_high": log_rel,
        "on": view.on,
        "on_below": view.on_below,
        "off_above": view.off_above,
    }
    kwargs = {
        "name": LAYER_NAMES["implant_view"],
        "shape_type": "polygon",
        "features": features,
        "face_color": "log10_over_high",
        "face_colormap": "viridis",
        "face_contrast_limits": (float(np.log10(floor)), max(1.0, float(log_rel.max()))),
        "edge_color": list(edges),
        "edge_width": max(implant.pitch_um * 0.05, 0.5),
        "opacity": 0.9,
        "visible": visible,
        "units": ("um", "um"),
        "metadata": {
            "threshold_mw_per_mm2": t.as_pair(),
            "source": t.source,
            "pulse_ms": t.pulse_ms,
            "cautions": CAUTION_SHORT,
        },
    }
    return (data, kwargs, "shapes")


def zero_order_points(zero_order_um: tuple[float, float], field_width_um: float) -> tuple:
    """A Points layer marking the zero order (the optical axis unless the relay moves it)."""
    x, y = zero_order_um
    return (
        display_yx(np.array([x]), np.array([y])),
        {
            "name": LAYER_NAMES["zero_order"],
            "symbol": "cross",
            "size": max(field_width_um * 0.03, 1.0),
            "face_color": "cyan",
            "border_color": "cyan",
            "units": ("um", "um"),
        },
        "points",
    )


def stimulus_layers(result) -> list[tuple]:
    """Layers of one computed stimulus: target, SLM phase, irradiance, implant, zero order.

    Parameters
    ----------
    result : StimulusResult

    Returns
    -------
    list of tuple
        Bottom to top: target, irradiance, implant, zero order on the retina
        (µm), then the SLM phase in the SLM plane (SLM µm), hidden at first and
        last so that the first view frames the retina.
    """
    pred = result.prediction
    holo = result.hologram
    target = holo.target
    irr = pred.irradiance_mw_per_mm2
    top = float(irr.max()) if irr.size and irr.max() > 0 else 1.0
    meta = {RESULT_KEY: result}
    layers = [
        (
            target.intensity,
            {
                "name": LAYER_NAMES["target"],
                "colormap": "gray",
                "contrast_limits": (0.0, 1.0),
                "metadata": meta,
                **grid_placement(target.grid),
            },
            "image",
        ),
        (
            irr,
            {
                "name": LAYER_NAMES["irradiance"],
                "colormap": "inferno",
                "contrast_limits": (0.0, top),
                "metadata": meta,
                **grid_placement(pred.grid),
            },
            "image",
        ),
    ]
    if result.implant is not None and result.pixel_power_uw is not None:
        shp = implant_shapes(result.implant, result.pixel_power_uw, result.on)
        shp[1]["metadata"] = meta
        layers.append(shp)
        view = result_view(result)
        if view is not None:
            vshp = implant_view_shapes(result.implant, view)
            vshp[1]["metadata"] = {**vshp[1]["metadata"], **meta}
            layers.append(vshp)
    pts = zero_order_points(pred.zero_order_um, result.system.field_width_um)
    pts[1]["metadata"] = meta
    layers.append(pts)
    # the SLM plane last: napari frames its first view on the first layer it is given,
    # so the view opens on the retina, not on the (hidden, far larger) SLM
    layers.append(
        (
            holo.phase_rad,
            {
                "name": LAYER_NAMES["phase"],
                "colormap": "twilight",
                "contrast_limits": (0.0, TWO_PI),
                "visible": False,
                "metadata": meta,
                **slm_placement(result.system.slm),
            },
            "image",
        )
    )
    return layers


def frame_axes(placement: dict[str, Any]) -> dict[str, Any]:
    """A 2-D placement (``grid_placement``, ``slm_placement``) with a frame axis in front."""
    return {
        "scale": (1.0, *placement["scale"]),
        "translate": (0.0, *placement["translate"]),
        "units": ("dimensionless", "um", "um"),
        "axis_labels": ("frame", "-y", "x"),
    }


def plan_frame_maps(plan):
    """Lazy per-frame retinal irradiance of a plan, mW/mm² (dark pauses are zeros).

    Each hologram is predicted at 1 mW; frame ``k`` is its hologram's map
    times the frame's laser power.
    """

    pages = [sp.prediction.irradiance_mw_per_mm2 for sp in plan.holograms]
    idx = [f.hologram_index if f.lit else -1 for f in plan.frames]
    scale = [f.power_mw / REFERENCE_POWER_MW if f.lit else 0.0 for f in plan.frames]
    return frame_stack(pages, idx, scale)


def plan_layers(plan) -> list[tuple]:
    """Layers of a planned sequence: per-frame retina (time axis), SLM grey, implant, zero order.

    Parameters
    ----------
    plan : Plan

    Returns
    -------
    list of tuple
        Empty when no frame is lit (nothing to show).
    """
    if not plan.holograms:
        return []

    pred0 = plan.holograms[0].prediction
    peak = 0.0
    for sp in plan.holograms:
        powers = [
            f.power_mw for f in plan.frames if f.lit and f.hologram_index == sp.hologram_index
        ]
        if powers:
            m = float(sp.prediction.irradiance_mw_per_mm2.max())
            peak = max(peak, m * max(powers) / REFERENCE_POWER_MW)
    peak = peak if peak > 0 else 1.0
    meta = {PLAN_KEY: plan}
    g = grid_placement(pred0.grid)
    system = plan.spec.system
    slm = slm_placement(system.slm)
    levels = system.slm.phase_levels
    grey_pages = [sp.hologram.grey for sp in plan.holograms]
    grey_idx = [f.hologram_index if f.lit else -1 for f in plan.frames]
    grey_top = float(max(int(p.max()) for p in grey_pages)) or float(levels - 1)
    layers = [
        (
            plan_frame_maps(plan),
            {
                "name": LAYER_NAMES["sequence"],
                "colormap": "inferno",
                "contrast_limits": (0.0, peak),
                "metadata": meta,
                **frame_axes(g),
            },
            "image",
        ),
    ]
    if plan.spec.implant is not None:
        layers.append(implant_shapes(plan.spec.implant))
    layers.append(zero_order_points(pred0.zero_order_um, system.field_width_um))
    layers.append(  # the SLM plane last, hidden: the first view frames the retina
        (
            frame_stack(grey_pages, grey_idx),
            {
                "name": LAYER_NAMES["sequence_grey"],
                "colormap": "gray",
                "contrast_limits": (0.0, grey_top),
                "visible": False,
                **frame_axes(slm),
            },
            "image",
        )
    )
    return layers


def export_layers(bundle, replay=None) -> list[tuple]:
    """Layers of an export folder read back: its predicted retina, the implant, the SLM grey.

    Parameters
    ----------
    bundle : ExportBundle
    replay : ReplayedExport, optional
        The export's grey levels predicted again on the retina
        (:func:`stimplan.present.replay.replay_export`); without it only the
        grey levels are shown.

    Returns
    -------
    list of tuple
        The per-frame retina in retinal µm with a frame axis (dark pauses are
        zeros) and the implant's outline when there is a replay, then the
        grey levels ``(n_frames, rows, cols)`` in SLM µm (hidden when the
        retina is shown, and last, so that the first view frames the retina).
    """
    grey = bundle.grey
    manifest = bundle.manifest
    pitch = float(manifest.get("config", {}).get("optics", {}).get("slm", {}).get("pitch_um", 1.0))
    rows, cols = grey.shape[-2:]
    if bundle.timeline:
        idx = [int(r.get("hologram_index", -1)) for r in bundle.timeline]
        data = frame_stack(list(grey), idx)
    else:
        data = grey
    top = float(grey.max()) if grey.size and grey.max() > 0 else 1.0
    plane = _slm_plane(rows, cols, pitch)
    meta = {
        EXPORT_KEY: str(bundle.path),
        "verdict": bundle.verdict,
        "timeline": bundle.timeline,
        "exposure": manifest.get("exposure"),
        "title": manifest.get("title"),
        "cautions": manifest.get("cautions"),
    }
    layers = []
    if replay is not None and replay.predictions:
        pages = [p.irradiance_mw_per_mm2 for p in replay.predictions]
        peaks = [
            float(pages[k].max()) * s
            for k, s in zip(replay.frame_pages, replay.frame_scale, strict=True)
            if k >= 0
        ]
        g = grid_placement(replay.predictions[0].grid)
        layers.append(
            (
                frame_stack(pages, replay.frame_pages, replay.frame_scale),
                {
                    "name": LAYER_NAMES["export_retina"],
                    "colormap": "inferno",
                    "contrast_limits": (0.0, max(peaks, default=0.0) or 1.0),
                    "metadata": meta,
                    **frame_axes(g),
                },
                "image",
            )
        )
        if replay.spec.implant is not None:
            layers.append(implant_shapes(replay.spec.implant))
    layers.append(
        (
            data,
            {
                "name": LAYER_NAMES["export_grey"],
                "colormap": "gray",
                "contrast_limits": (0.0, top),
                "visible": not layers,
                **frame_axes(plane),
                "metadata": meta,
            },
            "image",
        )
    )
    return layers

"""GUI: the plugin's panels, readers, writer and preview in a real napari viewer (Xvfb).

Small SLMs (128 px) keep every plan to a second or two.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from stimplan.plan import plan_sequence
from stimplan.present.export import load_export
from stimplan.sequence import load_sequence
from stimplan_napari import _readout
from stimplan_napari._io import get_export_reader, get_sequence_reader, is_sequence_file
from stimplan_napari._layers import LAYER_NAMES, PLAN_KEY

from .scenarios import gui_sequence

PLUGIN = "stimplan"

# A protocol cap far below what the sequence delivers: the plan is "above".
LOW_CAP = """
[limits]
peak_irradiance_mw_per_mm2 = 0.05
name = "test cap"
"""


def _write(tmp_path, name="small.toml", *, power=1.0, limits=""):
    p = tmp_path / name
    p.write_text(gui_sequence(power, limits))
    return p


@pytest.fixture
def warnings_seen(monkeypatch):
    """Every napari warning the plugin shows (show_warning is patched where it is used)."""
    seen: list[str] = []
    monkeypatch.setattr(_readout, "show_warning", seen.append)
    return seen


def _dock(viewer, name):
    _, widget = viewer.window.add_plugin_dock_widget(PLUGIN, name)
    return widget


def _assert_view_frames(viewer, implant, *, most=3.0):
    """The visible world rectangle holds the implant's footprint and is at most ``most``
    times its size: the first view frames the implant, not the (far larger) SLM plane."""
    assert viewer.canvas.overlays.scale_bar.visible
    rows, cols = viewer.canvas.size
    zoom = viewer.scene.camera.zoom
    cy, cx = viewer.scene.camera.center[-2:]
    x0, x1, y0, y1 = implant.footprint_extent_um
    # common practice: napari's world is (-y, x); zoom is canvas pixels per world unit
    half_h, half_w = rows / zoom / 2, cols / zoom / 2
    assert cx - half_w <= x0 and x1 <= cx + half_w
    assert cy - half_h <= -y1 and -y0 <= cy + half_h
    assert min(2 * half_h / (y1 - y0), 2 * half_w / (x1 - x0)) <= most


# -- stimulus and hologram panel -------------------------------------------------------------


def test_stimulus_panel_computes_layers_in_micrometres(make_napari_viewer, qtbot):
    viewer = make_napari_viewer(show=True)
    panel = _dock(viewer, "Stimulus and hologram")
    panel.optics.value = "rat grating-acuity demo"
    panel.slm_pixels.value = 128
    panel.power_by.value = "laser power"
    panel.laser_power_mw.value = 2.0
    panel.kind.value = "spot"
    panel.param_widgets["diameter_um"].value = 400.0
    panel.method.value = "mraf"
    panel.iterations.value = 15
    panel.defocus_d.value = 3.0  # a tolerance analysis over ±3 D
    panel.compute.native.click()
    assert panel.busy  # the work runs in a worker thread: the click returned at once
    qtbot.waitUntil(lambda: panel.result is not None and not panel.busy, timeout=60000)
    assert not panel.status.value.startswith("error"), panel.status.value

    res = panel.result
    _assert_view_frames(viewer, res.implant)
    names = [layer.name for layer in viewer.layers]
    for key in ("target", "phase", "irradiance", "implant", "zero_order"):
        assert LAYER_NAMES[key] in names

    # Source: Goodman, Introduction to Fourier Optics, 3rd ed., §5.2 (a lens maps spatial
    # frequency ν to x = λ f ν): an N-pixel SLM of pitch p gives far-field samples of pitch
    # λ f_eff / (N p), f_eff = f_eye / M and f_eye = (µm per degree) × 180/π.
    eye = res.system.eye
    f_eff_mm = eye.um_per_deg * 180 / math.pi * 1e-3 / 0.2
    pitch_um = 880e-6 * f_eff_mm / (128 * 8e-3) * 1e3
    target = viewer.layers[LAYER_NAMES["target"]]
    assert target.scale == pytest.approx([pitch_um, pitch_um], rel=1e-9)
    irr = viewer.layers[LAYER_NAMES["irradiance"]]
    assert irr.scale == pytest.approx([pitch_um / 2, pitch_um / 2], rel=1e-9)  # oversample 2
    assert [str(u) for u in irr.units] == ["micrometer", "micrometer"]
    # the SLM phase is in the SLM plane, at the SLM pitch, on a cyclic colormap over [0, 2π)
    phase = viewer.layers[LAYER_NAMES["phase"]]
    assert phase.scale == pytest.approx([8.0, 8.0])
    assert phase.colormap.name == "twilight"
    assert phase.contrast_limits == pytest.approx([0.0, 2 * np.pi])

    # Source: Goodman, Introduction to Fourier Optics, 3rd ed., §2.1.3, Rayleigh's
    # (Parseval's) theorem (section number from memory): the far field carries the
    # power of the field it came from, so the layer's sum × sample area is the power
    # the library predicts on the retina, and never more than the laser power times
    # the ocular transmission.
    area_mm2 = irr.scale[0] * irr.scale[1] * 1e-6
    total_mw = float(np.sum(irr.data, dtype=np.float64)) * area_mm2
    acc = res.prediction.account
    assert total_mw == pytest.approx(acc.retina_mw, rel=1e-4)
    assert total_mw <= 2.0 * eye.transmission * (1 + 1e-6)
    assert acc.total_mw() == pytest.approx(2.0, rel=1e-4)
    assert irr.contrast_limits == pytest.approx([0.0, float(irr.data.max())])

    # the photodiodes: one polygon per pixel, coloured by the delivered power (µW), which
    # sums the irradiance over each active area (the library's readout at 2 mW)
    shapes = viewer.layers[LAYER_NAMES["implant"]]
    assert shapes.nshapes == res.implant.n_pixels
    assert np.allclose(shapes.features["power_uw"], res.pixel_power_uw)
    # common practice: napari's y axis points down, so world coordinates are (-y, x)
    cx, cy = res.implant.centers_um[0]
    assert shapes.data[0].mean(axis=0) == pytest.approx([-cy, cx], abs=0.2 * res.implant.pitch_um)
    # common practice: the unmodulated light (zero order) lands on the optical axis
    zero = viewer.layers[LAYER_NAMES["zero_order"]]
    assert zero.data[0] == pytest.approx([0.0, 0.0])

    readout = _dock(viewer, "Exposure and efficiency")
    # one table row per stimulus, in the units the CLI uses
    assert "ON pixel, hologram (µW)" in readout.table.column_headers
    (row,) = readout.table.data.to_list()
    cols = list(readout.table.column_headers)
    on_uw = res.pixel_power_uw[res.on].mean()
    assert row[cols.index("ON pixel, hologram (µW)")] == f"{on_uw:.3g}"
    assert row[cols.index("legibility")] == "ok"  # a 400 µm spot on 55 µm pixels
    # the tolerance column: the worst ON pixel over -3, 0, +3 D
    assert row[cols.index("tolerance")].startswith("worst ON pixel"), row[cols.index("tolerance")]
    assert "3 cases" in row[cols.index("tolerance")]
    assert "not a safety approval" in readout.figures.value  # the cautions go with it
    # the loss chain of the bench, as the CLI prints it (ideal SLM and relay here)
    assert "source and loss chain: modulated polarisation 100.0%" in readout.figures.value
    assert "relay transmission 1" in readout.figures.value
    assert "not a safety approval" in readout.verdict.value

    viewer.window.resize(1280, 1000)  # room for the canvas beside the two panels
    qtbot.wait(50)
    shot = viewer.screenshot(flash=False)
    assert shot.ndim == 3 and np.ptp(shot[..., :3]) > 0  # not blank
    # the first view frames the implant: its drawn photodiodes span most of the canvas's
    # narrower side (a view of the whole SLM plane would leave the implant a speck)
    canvas = viewer.screenshot(canvas_only=True, flash=False)[..., :3]
    body = canvas[: int(canvas.shape[0] * 0.9)]  # above the scale bar
    rows, cols = np.nonzero(body.max(axis=-1) > 40)
    span = max(np.ptp(rows) / canvas.shape[0], np.ptp(cols) / canvas.shape[1])
    assert span > 0.5, span


def test_stimulus_panel_uses_a_sequence_files_optics(make_napari_viewer, qtbot, tmp_path):
    from stimplan_napari._widgets import OPTICS_FILE

    path = _write(tmp_path, power=1.5)
    viewer = make_napari_viewer()
    panel = _dock(viewer, "Stimulus and hologram")
    panel.optics.value = OPTICS_FILE
    panel.optics_file.value = path
    assert panel.laser_power_mw.value == pytest.approx(2.0)  # the file's laser power
    panel.kind.value = "landolt"
    panel.param_widgets["orientation"].value = "up"
    panel.iterations.value = 5
    panel.start()
    qtbot.waitUntil(lambda: not panel.busy, timeout=60000)
    assert panel.result is not None, panel.status.value
    assert panel.result.system.slm.shape == (128, 128)  # the file's SLM
    assert panel.result.stimulus_plan.hologram.settings.iterations == 5

    # bad input: a clear message that names the field, no crash
    panel.kind.value = "annulus"
    panel.param_widgets["inner_diameter_um"].value = 600.0
    panel.param_widgets["outer_diameter_um"].value = 300.0  # inner > outer
    panel.start()
    qtbot.waitUntil(lambda: not panel.busy, timeout=60000)
    assert panel.status.value.startswith("error")
    assert "annulus" in panel.status.value


# -- sequence panel, readers, writer -------------------------------------------------------


def test_sequence_panel_steps_through_frames(make_napari_viewer, qtbot, tmp_path, warnings_seen):
    path = _write(tmp_path, power=1.5)
    viewer = make_napari_viewer()
    panel = _dock(viewer, "Sequence")
    panel.sequence_file.value = path
    panel.plan_button.native.click()
    qtbot.waitUntil(lambda: panel.plan is not None and not panel.busy, timeout=60000)
    plan = panel.plan
    _assert_view_frames(viewer, plan.spec.implant)
    layer = viewer.layers[LAYER_NAMES["sequence"]]
    n = len(plan.frames)
    # the viewer opens on the first lit frame
    assert viewer.dims.current_step[0] == next(k for k, f in enumerate(plan.frames) if f.lit)
    assert layer.data.shape[0] == n
    assert layer.scale[1:] == pytest.approx([plan.holograms[0].prediction.grid.pitch_y_um] * 2)
    # common practice (linear optics): each frame is its hologram's 1 mW map times the
    # frame's laser power; dark pauses are zeros
    for i, f in enumerate(plan.frames):
        page = np.asarray(layer.data[i])
        if f.lit:
            ref = plan.holograms[f.hologram_index].prediction.irradiance_mw_per_mm2
            assert np.allclose(page, ref * f.power_mw, rtol=1e-5)
        else:
            assert not page.any()
    # common practice: the timeline of the file, by hand: bars 0-200 ms, dark 200-300 ms,
    # then dot 300-400 ms, dark 400-450 ms, dot 450-550 ms, dark 550-600 ms
    assert [f.start_ms for f in plan.frames] == pytest.approx([0, 200, 300, 400, 450, 550])
    viewer.dims.set_current_step(0, 2)
    assert panel.frame_info.value.startswith("frame 2 of 0-5: 300 ms + 100 ms")  # as the slider
    assert "dot" in panel.frame_info.value
    viewer.dims.set_current_step(0, 1)
    assert "dark pause" in panel.frame_info.value
    # play steps the slider with a timer at the frames' own durations (here 100x faster)
    viewer.dims.set_current_step(0, 0)
    panel.speed.value = 100.0
    panel.play.native.click()
    qtbot.waitUntil(lambda: viewer.dims.current_step[0] == n - 1, timeout=5000)
    qtbot.waitUntil(lambda: panel.play.text == "play", timeout=5000)
    assert warnings_seen == []  # within the limit, the beam fits the pupil

    # export from the panel, read it back with the library (checksums verified)
    panel.export_folder.value = tmp_path / "exported"
    out = panel.export()
    bundle = load_export(out)
    assert bundle.grey.shape == (len(plan.holograms), 128, 128)
    assert np.array_equal(bundle.grey[0], plan.holograms[0].hologram.grey)
    assert len(bundle.timeline) == n


def test_over_limit_sequence_warns_and_refuses_export(
    make_napari_viewer, qtbot, tmp_path, warnings_seen
):
    path = _write(tmp_path, power=1.0, limits=LOW_CAP)
    viewer = make_napari_viewer()
    panel = _dock(viewer, "Sequence")
    panel.sequence_file.value = path
    panel.start()
    qtbot.waitUntil(lambda: panel.plan is not None and not panel.busy, timeout=60000)
    assert panel.plan.verdict == "above"
    # the user is told, with the cautions, for the sequence and for the frames of each stimulus
    assert any("sequence is above the limit" in m for m in warnings_seen)
    assert any("frames" in m and "above the limit" in m for m in warnings_seen)
    assert all("not a safety approval" in m for m in warnings_seen)
    readout = _dock(viewer, "Exposure and efficiency")
    assert "ABOVE" in readout.verdict.value
    # the panel says what binds: here the protocol cap, with the figure that decides
    assert "what binds: protocol cap" in readout.figures.value
    assert "the protocol cap binds" in readout.figures.value
    assert any("protocol cap" in m for m in warnings_seen)

    panel.export_folder.value = tmp_path / "refused"
    assert panel.export() is None
    assert "refused" in panel.export_status.value
    assert not (tmp_path / "refused").exists()
    panel.reason.value = "bench test with a power meter, no eye"
    out = panel.export()
    bundle = load_export(out)
    assert bundle.manifest["acknowledgement"]["reason"] == "bench test with a power meter, no eye"
    # the same folder again: the panel names its own checkbox, not the command's flag
    assert panel.export() is None
    assert "replace an existing folder" in panel.export_status.value
    assert "--force" not in panel.export_status.value


def test_readers_and_writer(make_napari_viewer, tmp_path, warnings_seen):
    path = _write(tmp_path)
    other = tmp_path / "other.toml"
    other.write_text('title = "not ours"\n[tool.x]\ny = 1\n')
    assert get_sequence_reader(str(other)) is None  # any other TOML is left to other readers
    assert get_sequence_reader(str(tmp_path / "missing.toml")) is None
    assert is_sequence_file(path)

    viewer = make_napari_viewer()
    layers = viewer.open(str(path), plugin=PLUGIN)
    seq = viewer.layers[LAYER_NAMES["sequence"]]
    assert seq in layers
    plan = seq.metadata[PLAN_KEY]
    assert seq.data.shape[0] == len(plan.frames)
    assert LAYER_NAMES["outline"] in [layer.name for layer in viewer.layers]
    # a sequence panel opened afterwards picks up the plan the reader made
    panel = _dock(viewer, "Sequence")
    assert panel.plan is plan

    # the writer exports the plan behind the layers; the library reads it back
    folder = tmp_path / "via_writer"
    written = viewer.layers.save(str(folder), selected=False, plugin=PLUGIN)
    assert written == [str(folder)]
    bundle = load_export(folder)
    assert bundle.manifest["format"] == "stimplan-export/1"
    assert bundle.grey.shape[0] == len(plan.holograms)
    assert [r["hologram_index"] for r in bundle.timeline] == [f.hologram_index for f in plan.frames]

    # the export reader: the folder or its manifest, grey levels per frame (dark = zeros)
    assert get_export_reader(str(tmp_path)) is None
    assert get_export_reader(str(folder / "manifest.json")) is not None
    retina, outline, grey = viewer.open(str(folder), plugin=PLUGIN)
    assert grey.data.shape == (len(plan.frames), 128, 128)
    for i, f in enumerate(plan.frames):
        page = np.asarray(grey.data[i])
        if f.hologram_index < 0:
            assert not page.any()
        else:
            assert np.array_equal(page, bundle.grey[f.hologram_index])
    assert grey.scale[1:] == pytest.approx([8.0, 8.0])  # SLM pitch, µm
    # ... and the retina those grey levels make, predicted again: the planned map of
    # each lit frame (common practice: the same levels through the same optics give the
    # same far field; the plan's own prediction is of its quantised levels too)
    assert retina.name == LAYER_NAMES["export_retina"] and not grey.visible
    assert outline.name.startswith(LAYER_NAMES["outline"])  # napari numbers a second one
    for i, f in enumerate(plan.frames):
        page = np.asarray(retina.data[i])
        if not f.lit:
            assert not page.any()
            continue
        ref = plan.holograms[f.hologram_index].prediction.irradiance_mw_per_mm2 * f.power_mw
        np.testing.assert_allclose(page, ref, rtol=2e-3, atol=1e-4 * float(ref.max()))
    # the readout shows what the export recorded, with the cautions
    readout = _dock(viewer, "Exposure and efficiency")
    viewer.layers.selection.active = retina
    assert "recorded in the export" in readout.verdict.value
    assert "not a safety approval" in readout.figures.value
    assert warnings_seen == []


def test_writer_refuses_over_limit_plan(tmp_path):
    from stimplan.errors import ExposureLimitError
    from stimplan_napari._io import write_export
    from stimplan_napari._layers import plan_layers

    plan = plan_sequence(load_sequence(_write(tmp_path, limits=LOW_CAP)), progress=False)
    tuples = plan_layers(plan)
    with pytest.raises(ExposureLimitError):
        write_export(str(tmp_path / "out"), [(d, m, t) for d, m, t in tuples])
    assert not (tmp_path / "out").exists()


def test_clipped_beam_warns(tmp_path, warnings_seen):
    # The beam at the pupil is 2 w M = 2 × 0.29 mm × 0.2 = 0.116 mm (Gaussian 1/e² diameter,
    # Source: Siegman, Lasers (1986), ch. 17), wider than a 0.1 mm pupil.
    text = gui_sequence(1.0).replace('preset = "rat"', 'preset = "rat"\npupil_diameter_mm = 0.1')
    path = tmp_path / "clipped.toml"
    path.write_text(text)
    reader = get_sequence_reader(str(path))
    layers = reader(str(path))
    assert layers
    assert any("overfills" in m and "pupil" in m for m in warnings_seen)


def test_preview_opens_and_closes(tmp_path, warnings_seen):
    from stimplan.cli import main
    from stimplan_napari.preview import preview

    path = _write(tmp_path)
    assert preview(path, close_after_load=True) == 0
    assert main(["preview", str(path), "--close-after-load"]) == 0


def test_size_fields_take_only_plausible_sizes(make_napari_viewer):
    # Sizes are positive and bounded like the core's ranges (stimplan.ranges): a grating
    # period of 0 or -1e6 µm is no stimulus. (common practice)
    from stimplan.ranges import RANGES

    viewer = make_napari_viewer()
    panel = _dock(viewer, "Stimulus and hologram")
    panel.kind.value = "grating"
    period = next(w for w in panel.params if w.name == "period_um")
    assert period.min > 0 and period.max == RANGES["retinal_length_um"].hi
    assert "µm" in period.label


def test_an_optotype_can_be_sized_by_logmar(make_napari_viewer):
    # logMAR 1.0 is a MAR of 10 arcmin; a Landolt C is 5 MAR high; the human eye's
    # 288 µm/deg (Drasdo & Fowler 1974) makes that 5 * 10/60 * 288 = 240 µm.
    # Source: Bailey & Lovie (1976); ISO 8596.
    from stimplan_napari._compute import compute_stimulus

    viewer = make_napari_viewer()
    panel = _dock(viewer, "Stimulus and hologram")
    panel.optics.value = "human letter-acuity demo"
    panel.slm_pixels.value = 64
    panel.iterations.value = 2
    panel.kind.value = "landolt"
    panel.param_widgets["size_by"].value = "logMAR"
    panel.param_widgets["logmar"].value = 1.0
    panel.implant_aware.value = False  # a 240 µm ring turns no 100 µm pixel half on,
    panel.power_by.value = "laser power"  # so no ON-pixel irradiance can be its target
    res = compute_stimulus(panel.request())
    ring = res.plan.spec.stimuli["landolt"]
    assert ring.height_um == pytest.approx(5 * 10 / 60 * 288.0, rel=1e-6)
    # its 48 µm gap is under the 100 µm pitch: the readout's table says so
    # (Source: Lorach et al. 2015, the sampling limit is one pixel pitch; ISO 8596)
    panel.show(res)
    readout = _dock(viewer, "Exposure and efficiency")
    cols = list(readout.table.column_headers)
    (row,) = readout.table.data.to_list()
    assert "48 µm" in row[cols.index("legibility")], row


@pytest.mark.parametrize("optics", ["rat grating-acuity demo", "human letter-acuity demo"])
@pytest.mark.parametrize("kind", ["grating", "landolt", "spot"])
def test_the_panels_defaults_stay_within_the_demo_protocol(make_napari_viewer, optics, kind):
    # A first click on "compute" must not plan light above the standard or the
    # scenario's own protocol cap (the demo [limits], our own numbers), whatever the
    # stimulus: the panel sets the power by a target ON-pixel irradiance. common practice
    from stimplan_napari._compute import compute_stimulus

    viewer = make_napari_viewer()
    panel = _dock(viewer, "Stimulus and hologram")
    panel.optics.value = optics
    panel.slm_pixels.value = 128  # coarser sampling of the same field, for speed
    panel.iterations.value = 10
    panel.kind.value = kind
    res = compute_stimulus(panel.request())
    e = res.plan.exposure
    assert res.plan.verdict == "within", e.binding_text()
    if e.protocol is not None:
        assert e.protocol.worst_ratio < 1.0
    # the laser power is the one that meets the target on the ON photodiodes
    h = res.stimulus_plan.hologram_figures
    target = panel.irradiance.value
    assert h.on_irradiance_mw_per_mm2 * res.power_mw == pytest.approx(target, rel=1e-6)

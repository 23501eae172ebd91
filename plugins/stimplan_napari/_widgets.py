"""The plugin's panels: stimulus and hologram, sequence, exposure and efficiency.

Each panel is a magicgui :class:`~magicgui.widgets.Container` whose controls
are attributes (tests set them). Long work runs in a napari
``thread_worker`` with a progress bar in napari's activity dock, so the
viewer stays responsive.
"""

from __future__ import annotations

import queue
import threading
import traceback
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from magicgui.widgets import (
    CheckBox,
    ComboBox,
    Container,
    FileEdit,
    FloatSpinBox,
    Label,
    LineEdit,
    PushButton,
    SpinBox,
)
from napari.qt.threading import create_worker
from napari.utils import progress
from napari.utils.notifications import show_error, show_info

from stimplan.cautions import CAUTION_SHORT
from stimplan.errors import StimplanError
from stimplan.holography import METHODS
from stimplan.implant import implant_names
from stimplan.plan import plan_sequence
from stimplan.plan.memory import check_memory
from stimplan.present.export import export_plan
from stimplan.ranges import RANGES
from stimplan.sequence import load_sequence

from ._compute import (
    NO_IMPLANT,
    OPTICS_PRESETS,
    PANEL_KINDS,
    SOURCE_IMPLANT,
    StimulusRequest,
    compute_stimulus,
    load_optics,
    stimulus_fields,
)
from ._layers import LAYER_NAMES, PLAN_KEY, plan_layers, stimulus_layers
from ._readout import announce

if TYPE_CHECKING:
    import napari

__all__ = [
    "StimulusPanel",
    "SequencePanel",
    "progress_steps",
    "put_layers",
    "wrapping",
    "STIMULUS_PANEL",
    "SEQUENCE_PANEL",
    "READOUT_PANEL",
    "OPTICS_FILE",
]

#: Display names of the panels in the manifest.
STIMULUS_PANEL = "Stimulus and hologram"
SEQUENCE_PANEL = "Sequence"
READOUT_PANEL = "Exposure and efficiency"
PLUGIN = "stimplan"

#: How the Stimulus panel sets the power: a target irradiance on the ON pixels'
#: photodiodes (the laser power follows; within the demo protocols), or the laser power.
POWER_BY = ("ON-pixel irradiance", "laser power")
#: The panel's starting target, mW/mm² (the demo scenarios' steps use 0.5-1.5).
DEFAULT_IRRADIANCE_MW_PER_MM2 = 1.0

#: Optics choice that reads the optics, eye and implant from a sequence file.
OPTICS_FILE = "sequence file ..."
#: Shortest interval of the play timer, ms (about one screen refresh).
MIN_PLAY_INTERVAL_MS = 16


# -- shared helpers ----------------------------------------------------------------------


def progress_steps(fn: Callable[..., Any], *args: Any, **kwargs: Any):
    """Run ``fn(*args, progress=cb, **kwargs)`` and yield ``(done, total)`` as ``cb`` reports.

    A generator for napari's ``thread_worker``: the work runs in a helper
    thread so that callbacks deep inside it become ``yielded`` signals;
    the generator returns ``fn``'s result (or raises its error).
    """
    q: queue.SimpleQueue = queue.SimpleQueue()
    out: dict[str, Any] = {}

    def report(done: int, total: int) -> None:
        q.put((int(done), int(total)))

    def target() -> None:
        try:
            out["result"] = fn(*args, progress=report, **kwargs)
        except BaseException as exc:  # re-raised in the worker below
            out["error"] = exc
        finally:
            q.put(None)

    t = threading.Thread(target=target, name="stimplan-compute", daemon=True)
    t.start()
    while (item := q.get()) is not None:
        yield item
    t.join()
    if "error" in out:
        raise out["error"]
    return out["result"]


def put_layers(viewer, tuples: Iterable[tuple]) -> list:
    """Add layer tuples to the viewer; a layer of the same name is replaced in place."""
    from napari.layers import Layer

    added = []
    for data, kwargs, layer_type in tuples:
        if data is None:
            continue
        layer = Layer.create(data, dict(kwargs), layer_type)
        name = kwargs.get("name")
        if name is not None and name in viewer.layers:
            old = viewer.layers[name]
            index = list(viewer.layers).index(old)
            viewer.layers.remove(old)
            viewer.layers.insert(index, layer)
        else:
            viewer.add_layer(layer)
        added.append(layer)
    return added


#: Layers the view is framed on, first found first: the implant, else the retina.
FRAME_ON = ("implant", "outline", "irradiance", "sequence")


def frame_retina(viewer, layers: Iterable, *, margin: float = 0.05) -> None:
    """Turn the scale bar on (µm, from the layers' units) and fit the view to the implant.

    Without an implant the view fits the retinal map; the SLM-plane layers
    (far larger, in SLM µm) never set the view. Only the two displayed axes
    are framed, so a frame axis keeps its position.
    """
    viewer.canvas.overlays.scale_bar.visible = True
    by_name = {layer.name: layer for layer in layers}
    for key in FRAME_ON:
        layer = by_name.get(LAYER_NAMES[key])
        if layer is None:
            continue
        lo, hi = np.asarray(layer.extent.world, dtype=float)[:, -2:]
        size = np.maximum(hi - lo, 1e-9)
        canvas = np.asarray(viewer.canvas.size, dtype=float)
        viewer.scene.camera.center = tuple((lo + hi) / 2)
        viewer.scene.camera.zoom = float((1 - margin) * np.min(canvas / size))
        return


def _message(exc: BaseException) -> str:
    if isinstance(exc, StimplanError):
        return str(exc)
    return f"{type(exc).__name__}: {exc}"


def _readout_panel(viewer):
    """The viewer's readout panel, docked if it is not yet (None without a window)."""
    try:
        _, widget = viewer.window.add_plugin_dock_widget(PLUGIN, READOUT_PANEL)
    except (AttributeError, KeyError, ValueError):
        return None
    return widget


class _Background:
    """Runs one job at a time in a thread_worker, with a napari progress bar."""

    def __init__(self, button: PushButton, status: Label) -> None:
        self._button = button
        self._status = status
        self.worker = None
        self._bar = None

    @property
    def busy(self) -> bool:
        return self.worker is not None

    def start(self, desc: str, fn: Callable, *args: Any, on_result: Callable[[Any], None]) -> None:
        if self.busy:
            return
        self._bar = progress(total=0, desc=desc)
        worker = create_worker(progress_steps, fn, *args, _start_thread=False, _ignore_errors=True)
        worker.yielded.connect(self._on_step)
        worker.returned.connect(self._guarded(on_result))
        worker.errored.connect(self._on_error)
        worker.finished.connect(self._on_finished)
        self.worker = worker
        self._button.enabled = False
        self._status.value = desc + " ..."
        worker.start()

    def _guarded(self, fn: Callable[[Any], None]) -> Callable[[Any], None]:
        def call(value: Any) -> None:
            try:
                fn(value)
            except Exception as exc:  # shown to the user, never lost in a Qt slot
                self._on_error(exc)

        return call

    def _on_step(self, item: tuple[int, int]) -> None:
        done, total = item
        if self._bar is None:
            return
        if total and self._bar.total != total:
            self._bar.total = total
        step = done - self._bar.n
        if step > 0:
            self._bar.update(step)

    def _on_error(self, exc: BaseException) -> None:
        msg = _message(exc)
        if not isinstance(exc, StimplanError):
            traceback.print_exception(exc)
        self._status.value = "error: " + msg
        show_error("stimplan: " + msg)

    def _on_finished(self) -> None:
        if self._bar is not None:
            self._bar.close()
            self._bar = None
        self.worker = None
        self._button.enabled = True


def wrapping(label: Label) -> Label:
    """A label whose long text wraps instead of widening the panel."""
    from qtpy.QtWidgets import QSizePolicy

    label.native.setWordWrap(True)
    label.native.setSizePolicy(QSizePolicy.Ignored, QSizePolicy.Preferred)
    return label


def _pretty(name: str) -> str:
    for suffix, unit in (("_um", " (µm)"), ("_deg", " (°)"), ("_px", " (px)")):
        if name.endswith(suffix):
            return name[: -len(suffix)].replace("_", " ") + unit
    return name.replace("_", " ")


def _param_widget(name: str, hint: Any, start: Any, choices: tuple | None):
    label = _pretty(name)
    if choices:
        return ComboBox(name=name, label=label, choices=choices, value=start)
    if hint is bool:
        return CheckBox(name=name, text=label, value=bool(start))
    if hint is int:
        return SpinBox(name=name, label=label, value=int(start), min=-(2**31), max=2**31 - 1)
    if hint is str and name == "path":
        return FileEdit(name=name, label="image file", mode="r", value=start or None)
    if hint is str:
        return LineEdit(name=name, label=label, value=str(start))
    fine = name in ("contrast", "duty_cycle", "level")
    lo, hi = (0.0, 1.0) if fine else _spin_limits(name)
    return FloatSpinBox(
        name=name,
        label=label,
        value=min(max(float(start), lo), hi),
        min=lo,
        max=hi,
        step=0.05 if fine else (0.1 if name == "logmar" else 1.0),
    )


def _panel_words(message: str, checkbox: str) -> str:
    """A core message in the panel's words: the command's ``--force`` is a checkbox here."""
    return message.replace("pass --force", f"tick '{checkbox}'").replace(
        "with --force", f"with '{checkbox}' ticked"
    )


#: logMAR the panel offers: about 20/6 to 20/20 000 (prosthetic acuities are 1-2).
#: Source: Bailey & Lovie (1976): logMAR = log10(MAR / 1 arcmin); 20/x is MAR x/20.
LOGMAR_LIMITS = (-0.5, 3.0)

#: The smallest step of a spin box above an open lower bound (sizes must be > 0).
_ABOVE_ZERO = 0.01


def _ranged_spin(label: str, quantity: str, value: float) -> FloatSpinBox:
    """A spin box over a quantity's plausibility range (:data:`stimplan.ranges.RANGES`)."""
    r = RANGES[quantity]
    lo = r.lo + _ABOVE_ZERO if r.lo_open else r.lo
    return FloatSpinBox(label=label, min=lo, max=r.hi, step=0.1, value=value)


def _spin_limits(name: str) -> tuple[float, float]:
    """A parameter's spin-box limits from the core's plausibility ranges
    (:data:`stimplan.ranges.RANGES`): positions and angles may be negative, sizes
    must be positive."""
    if name == "logmar":
        return LOGMAR_LIMITS
    if name.endswith("_deg"):
        r = RANGES["angle_deg"]
    elif name.startswith("center_") and name.endswith("_um"):
        r = RANGES["retinal_position_um"]
    elif name.endswith("_um"):
        r = RANGES["retinal_length_um"]
    else:
        return -1e6, 1e6
    return (r.lo + _ABOVE_ZERO if r.lo_open else r.lo), r.hi


# -- stimulus and hologram ---------------------------------------------------------------


class StimulusPanel(Container):
    """Design one stimulus on an optical system and show its prediction on the retina.

    Inputs: the optics (a demo system or a sequence file, whose optics, eye
    and implant are used), the implant, the stimulus kind and its parameters
    in µm, the algorithm and its iterations, the laser power and the pulse
    train the exposure estimate assumes.

    Results are layers in retinal µm: the target, the SLM phase (``twilight``,
    in the SLM plane), the predicted irradiance in mW/mm², the implant
    photodiodes coloured by delivered power and the zero order.
    """

    def __init__(self, viewer: napari.viewer.Viewer) -> None:
        super().__init__(labels=True)
        self._viewer = viewer

        first = next(iter(OPTICS_PRESETS))
        self.optics = ComboBox(label="optics", choices=[*OPTICS_PRESETS, OPTICS_FILE], value=first)
        self.optics_file = FileEdit(label="optics file", mode="r", filter="*.toml", visible=False)
        self.slm_pixels = SpinBox(label="SLM px (0: as given)", min=0, max=8192, step=64, value=0)
        self.power_by = ComboBox(label="power by", choices=POWER_BY, value=POWER_BY[0])
        self.irradiance = _ranged_spin(
            "ON-pixel irradiance (mW/mm²)",
            "irradiance_mw_per_mm2",
            DEFAULT_IRRADIANCE_MW_PER_MM2,
        )
        self.laser_power_mw = _ranged_spin("laser power (mW)", "laser_power_mw", 1.0)
        self.laser_power_mw.visible = False
        self.implant = ComboBox(
            label="implant", choices=[SOURCE_IMPLANT, *implant_names(), NO_IMPLANT]
        )
        self.implant_aware = CheckBox(text="implant-aware target", value=True)
        self.kind = ComboBox(label="stimulus", choices=PANEL_KINDS, value="grating")
        self.params = Container(labels=True)
        self.method = ComboBox(label="algorithm", choices=METHODS, value="mraf")
        self.iterations = SpinBox(label="iterations", min=1, max=10000, value=40)
        self.seed = SpinBox(label="seed", min=0, max=2**31 - 1, value=0)
        self.pulse_ms = FloatSpinBox(label="pulse (ms)", min=1e-3, max=1e6, step=1.0, value=10.0)
        self.rate_hz = FloatSpinBox(
            label="pulse rate (Hz)", min=1e-3, max=1e6, step=1.0, value=20.0
        )
        self.train_ms = FloatSpinBox(
            label="train length (ms)", min=1e-3, max=3e7, step=100.0, value=1000.0
        )
        self.defocus_d = FloatSpinBox(
            label="tolerance: defocus ± (D)", min=0.0, max=30.0, step=0.25, value=0.0
        )
        self.shift_um = FloatSpinBox(
            label="tolerance: shift up to (µm)", min=0.0, max=2000.0, step=5.0, value=0.0
        )
        self.robust_design = CheckBox(text="robust design for the defocus", value=False)
        self.compute = PushButton(text="compute")
        self.status = wrapping(Label(value=""))
        self.extend(
            [
                self.optics,
                self.optics_file,
                self.slm_pixels,
                self.power_by,
                self.irradiance,
                self.laser_power_mw,
                self.implant,
                self.implant_aware,
                self.kind,
                self.params,
                self.method,
                self.iterations,
                self.seed,
                self.pulse_ms,
                self.rate_hz,
                self.train_ms,
                self.defocus_d,
                self.shift_um,
                self.robust_design,
                self.compute,
                self.status,
            ]
        )
        self.result = None
        self._job = _Background(self.compute, self.status)
        self.kind.changed.connect(self._rebuild_params)
        self.power_by.changed.connect(self._on_power_by)
        self.optics.changed.connect(self._on_optics)
        self.optics_file.changed.connect(self._on_optics)
        self.compute.changed.connect(self.start)
        self._rebuild_params()
        self._on_optics()

    # -- inputs ---------------------------------------------------------------------------
    @property
    def param_widgets(self) -> dict[str, Any]:
        """The stimulus parameter controls by parameter name."""
        return {w.name: w for w in self.params}

    @property
    def busy(self) -> bool:
        return self._job.busy

    @property
    def worker(self):
        return self._job.worker

    def _rebuild_params(self, *_: Any) -> None:
        self.params.clear()
        self.params.extend([_param_widget(*f) for f in stimulus_fields(self.kind.value)])

    def _optics_source(self) -> str:
        if self.optics.value == OPTICS_FILE:
            return str(self.optics_file.value)
        return self.optics.value

    def _on_optics(self, *_: Any) -> None:
        self.optics_file.visible = self.optics.value == OPTICS_FILE
        src = self._optics_source()
        if self.optics.value == OPTICS_FILE and not Path(src).is_file():
            return
        try:
            spec = load_optics(src)
        except StimplanError as exc:
            self.status.value = "error: " + str(exc)
            return
        s = spec.system
        self.laser_power_mw.value = s.illumination.power_mw
        self.status.value = (
            f"{spec.title}: SLM {s.slm.pixels_x}x{s.slm.pixels_y}, "
            f"field {s.field_width_um:.0f} µm, {s.eye.name} eye"
        )

    def _on_power_by(self, *_: Any) -> None:
        by_irradiance = self.power_by.value == POWER_BY[0]
        self.irradiance.visible = by_irradiance
        self.laser_power_mw.visible = not by_irradiance

    def request(self) -> StimulusRequest:
        """The inputs as a :class:`StimulusRequest`."""
        params = {}
        for name, w in self.param_widgets.items():
            val = w.value
            if isinstance(w, FileEdit):
                val = "" if val is None or str(val) in ("", ".") else str(val)
            params[name] = val
        return StimulusRequest(
            optics=self._optics_source(),
            kind=self.kind.value,
            params=params,
            implant=self.implant.value,
            implant_aware=self.implant_aware.value,
            method=self.method.value,
            iterations=self.iterations.value,
            seed=self.seed.value,
            slm_pixels=self.slm_pixels.value,
            power_mw=None if self.power_by.value == POWER_BY[0] else self.laser_power_mw.value,
            irradiance_mw_per_mm2=(
                self.irradiance.value if self.power_by.value == POWER_BY[0] else None
            ),
            pulse_ms=self.pulse_ms.value,
            rate_hz=self.rate_hz.value,
            train_ms=self.train_ms.value,
            defocus_d=self.defocus_d.value,
            shift_um=self.shift_um.value,
            robust_design=self.robust_design.value,
        )

    # -- compute --------------------------------------------------------------------------
    def start(self, *_: Any) -> None:
        """Start the computation in a worker thread (the button's action)."""
        self._job.start("stimplan hologram", compute_stimulus, self.request(), on_result=self.show)

    def show(self, result) -> None:
        """Put a :class:`~stimplan_napari._compute.StimulusResult` into the viewer."""
        self.result = result
        frame_retina(self._viewer, put_layers(self._viewer, stimulus_layers(result)))
        sp = result.stimulus_plan
        text = f"done: efficiency {sp.metrics.efficiency:.3f}"
        if result.pixel_power_uw is not None and result.on is not None and result.on.any():
            text += f", {result.pixel_power_uw[result.on].mean():.3g} µW per ON pixel"
        self.status.value = text
        panel = _readout_panel(self._viewer)
        if panel is not None:
            panel.show_plan(result.plan, title=f"stimulus: {result.request.kind}")
        r = result.request
        announce(
            result.plan,
            f"the {r.kind} stimulus ({r.pulse_ms:g} ms pulses at {r.rate_hz:g} Hz "
            f"for {r.train_ms:g} ms)",
        )


# -- sequence ------------------------------------------------------------------------------


class SequencePanel(Container):
    """Plan a sequence file, step and play through its frames, and export it.

    The predicted retina of every frame is one layer with a time axis (a
    lazy stack: each frame is its hologram's map times the frame's laser
    power; dark pauses are zeros). The label under the slider shows the
    current frame's timing. Export refuses a sequence estimated above a
    limit unless a reason is given.
    """

    def __init__(self, viewer: napari.viewer.Viewer) -> None:
        super().__init__(labels=True)
        self._viewer = viewer
        self.sequence_file = FileEdit(label="sequence file", mode="r", filter="*.toml")
        self.plan_button = PushButton(text="plan sequence")
        self.status = wrapping(Label(value=""))
        self.frame_info = wrapping(Label(value="no sequence planned"))
        self.speed = FloatSpinBox(label="speed (x real time)", min=0.01, max=1000, value=1.0)
        self.play = PushButton(text="play")
        self.export_folder = FileEdit(label="export folder", mode="w")
        self.stack_format = ComboBox(label="stack format", choices=("tiff", "png"), value="tiff")
        self.replace_existing = CheckBox(text="replace an existing folder", value=False)
        self.reason = LineEdit(label="reason (above limit)", value="")
        self.export_button = PushButton(text="export")
        self.export_status = wrapping(Label(value=""))
        self.caution = wrapping(Label(value=CAUTION_SHORT))
        self.extend(
            [
                self.sequence_file,
                self.plan_button,
                self.status,
                self.frame_info,
                self.speed,
                self.play,
                self.export_folder,
                self.stack_format,
                self.replace_existing,
                self.reason,
                self.export_button,
                self.export_status,
                self.caution,
            ]
        )
        self.plan = None
        self._job = _Background(self.plan_button, self.status)
        from qtpy.QtCore import QTimer

        self._timer = QTimer(self.native)
        self._timer.setSingleShot(True)
        self._timer.timeout.connect(self._advance)
        self.plan_button.changed.connect(self.start)
        self.play.changed.connect(self.toggle_play)
        self.export_button.changed.connect(self.export)
        viewer.dims.events.current_step.connect(self._on_step)
        viewer.layers.events.inserted.connect(self._on_inserted)
        for layer in viewer.layers:
            self._adopt(layer)

    @property
    def busy(self) -> bool:
        return self._job.busy

    @property
    def worker(self):
        return self._job.worker

    @property
    def playing(self) -> bool:
        return self.play.text == "stop"

    # -- planning ---------------------------------------------------------------------------
    def start(self, *_: Any) -> None:
        """Plan the chosen file in a worker thread (the button's action)."""
        path = self.sequence_file.value
        if path is None or not Path(path).is_file():
            self.status.value = f"error: sequence file = {path}: allowed an existing .toml file"
            return
        self._job.start("stimplan sequence", _plan_file, str(path), on_result=self.set_plan)

    def set_plan(self, plan, *, add_layers: bool = True) -> None:
        """Show a plan: its layers, the frame label, the readout and the warnings."""
        self.plan = plan
        n = len(plan.frames)
        self.status.value = (
            f"{plan.spec.title}: {n} frames, {len(plan.holograms)} holograms, "
            f"{plan.duration_ms / 1e3:.3g} s, verdict {plan.verdict}"
        )
        if add_layers:
            frame_retina(self._viewer, put_layers(self._viewer, plan_layers(plan)))
            panel = _readout_panel(self._viewer)
            if panel is not None:
                panel.show_plan(plan)
            announce(plan)
            # open on the first lit frame, not on a dark pause
            first = next((k for k, f in enumerate(plan.frames) if f.lit), None)
            if first is not None and self._frame_axis() >= 0:
                self._viewer.dims.set_current_step(self._frame_axis(), first)
        self._on_step()

    def _adopt(self, layer) -> None:
        plan = layer.metadata.get(PLAN_KEY) if hasattr(layer, "metadata") else None
        if plan is not None and plan is not self.plan:
            self.set_plan(plan, add_layers=False)

    def _on_inserted(self, event) -> None:
        self._adopt(event.value)

    # -- frames ------------------------------------------------------------------------------
    def _frame_axis(self) -> int:
        return self._viewer.dims.ndim - 3

    def current_frame(self) -> int | None:
        """Index of the frame the dims slider shows, or None without a sequence."""
        if self.plan is None or not self.plan.frames:
            return None
        ax = self._frame_axis()
        if ax < 0:
            return None
        i = int(self._viewer.dims.current_step[ax])
        return min(max(i, 0), len(self.plan.frames) - 1)

    def _on_step(self, *_: Any) -> None:
        i = self.current_frame()
        if i is None:
            return
        f = self.plan.frames[i]
        if f.lit:
            what = (
                f"{f.stimulus}, {f.power_mw:.3g} mW laser, pulses {f.pulse_ms:g} ms "
                f"at {f.rate_hz:g} Hz"
            )
        elif f.stimulus is not None:
            what = f"{f.stimulus} (dark)"
        else:
            what = "dark pause"
        n = len(self.plan.frames)
        # counted from 0, as napari's slider shows it
        self.frame_info.value = (
            f"frame {i} of 0-{n - 1}: {f.start_ms:.6g} ms + {f.duration_ms:.6g} ms, {what}"
        )

    def toggle_play(self, *_: Any) -> None:
        """Play the frames at their own durations (times the speed), or stop."""
        if self.playing:
            self.stop()
            return
        if self.current_frame() is None:
            return
        self.play.text = "stop"
        self._schedule()

    def stop(self) -> None:
        self._timer.stop()
        self.play.text = "play"

    def _schedule(self) -> None:
        i = self.current_frame()
        if i is None:
            self.stop()
            return
        ms = self.plan.frames[i].duration_ms / max(self.speed.value, 1e-9)
        self._timer.start(int(max(ms, MIN_PLAY_INTERVAL_MS)))

    def _advance(self) -> None:
        i = self.current_frame()
        if i is None or i + 1 >= len(self.plan.frames):
            self.stop()
            return
        self._viewer.dims.set_current_step(self._frame_axis(), i + 1)
        self._schedule()

    # -- export ------------------------------------------------------------------------------
    def export(self, *_: Any) -> Path | None:
        """Export the plan (the button's action); refuses above the limit without a reason."""

        if self.plan is None:
            self.export_status.value = "plan a sequence first"
            return None
        folder = self.export_folder.value
        if folder is None or str(folder) in ("", "."):
            self.export_status.value = "error: export folder: allowed a new folder path"
            return None
        reason = self.reason.value.strip()
        if self.plan.verdict == "above" and not reason:
            what = self.plan.exposure.binding_text() if self.plan.exposure else "no assessment"
            msg = (
                f"export refused: the sequence is estimated above a limit ({what}). "
                "Give a reason to export "
                f"anyway; it is recorded in the manifest. {CAUTION_SHORT}"
            )
            self.export_status.value = msg
            show_error("stimplan: " + msg)
            return None
        try:
            out = export_plan(
                self.plan,
                folder,
                force=self.replace_existing.value,
                stack_format=self.stack_format.value,
                acknowledge_reason=reason or None,
            )
        except StimplanError as exc:
            msg = _panel_words(str(exc), self.replace_existing.text)
            self.export_status.value = "error: " + msg
            show_error("stimplan: " + msg)
            return None
        self.export_status.value = f"exported to {out}"
        show_info(f"stimplan: exported to {out}")
        return out


def _plan_file(path: str, progress: Callable[[int, int], None]):

    spec = load_sequence(path)
    check_memory(spec)

    def holograms_only(stage: str, done: int, total: int) -> None:
        if stage == "holograms":  # the exposure stages have no known total
            progress(done, total)

    return plan_sequence(spec, progress=holograms_only)

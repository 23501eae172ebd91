"""Writing and reading export folders: hologram stack, timeline and manifest.

An export folder holds

* ``holograms.tif`` (multi-page TIFF, one page per distinct hologram, the SLM
  grey values) or ``holograms/hologram_000.png`` ... (one PNG each);
* ``timeline.csv``: one row per frame;
* ``events.csv``: one row per light pulse in time order (start, width, laser
  power, hologram index, condition code), to drive a TTL or DAQ card: the
  same pulses the exposure assessment counts (:mod:`stimplan.present.events`);
* ``manifest.json``: format version, stimplan version, the fully resolved
  configuration, the seed, the SHA-256 of every file, the grey lookup
  (grey value and phase of every level, and the checksum of a measured
  table file), the frame and hologram counts, the predicted figures
  of every hologram and frame, and the exposure verdict with the cautions.

Writing is atomic (a temporary sibling folder renamed at the end), never
replaces an existing folder without ``force``, and refuses a plan above the
exposure limit unless an acknowledgement with a reason is given, which the
manifest records.
"""

from __future__ import annotations

import csv
import datetime as _dt
import getpass
import hashlib
import io
import json
import math
import os
import time
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .. import __version__
from ..atomic import atomic_folder
from ..cautions import CAUTIONS
from ..errors import ConfigError, ExportError, ExposureLimitError, InputFileError, IntegrityError
from ..holography.quantize import grey_map_for
from ..plan.evaluate import mask_exposure
from .events import EVENT_COLUMNS, events_csv_text, pulse_events

__all__ = [
    "is_export_folder",
    "check_export_target",
    "check_writable_location",
    "EXPORT_FORMAT",
    "TIMELINE_COLUMNS",
    "export_plan",
    "load_export",
    "ExportBundle",
    "sha256_file",
    "json_safe",
]

EXPORT_FORMAT = "stimplan-export/1"
STACK_FORMATS = ("tiff", "png")
TIMELINE_COLUMNS = (
    "index",
    "start_ms",
    "duration_ms",
    "pulse_ms",
    "rate_hz",
    "power_mw",
    "hologram_index",
    "stimulus",
    "pulse_delay_ms",
)


def sha256_file(path: str | Path, chunk: int = 1 << 20) -> str:
    """SHA-256 of a file, hex."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


def json_safe(x: Any) -> Any:
    """JSON-safe values: inf and nan become strings, NumPy scalars Python numbers."""
    if isinstance(x, float) and not math.isfinite(x):
        return str(x)
    if isinstance(x, dict):
        return {k: json_safe(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [json_safe(v) for v in x]
    if isinstance(x, np.generic):
        return json_safe(x.item())
    return x


def _hologram_entry(sp) -> dict[str, Any]:
    entry: dict[str, Any] = {
        "index": sp.hologram_index,
        "stimulus": sp.name,
        "method": sp.hologram.settings.method,
        "iterations": sp.hologram.settings.iterations,
        "seed": sp.hologram.settings.seed,
        "offset_samples": list(sp.hologram.offset_samples),
        "metrics_per_mw": sp.metrics.as_dict(),
        "power_account_per_mw": sp.prediction.account.as_dict(),
    }
    if sp.readout is not None:
        entry["on_pixels"] = np.flatnonzero(sp.on).tolist()
        entry["pixel_power_uw_per_mw"] = np.asarray(sp.readout.power_uw).tolist()
        entry["hologram_figures_per_mw"] = (
            sp.hologram_figures.as_dict() if sp.hologram_figures else None
        )
        entry["mask_figures_per_mw"] = sp.mask_figures.as_dict() if sp.mask_figures else None
    return entry


def _lookup_entry(slm) -> dict[str, Any]:
    """The grey lookup the stack was written with: enough to turn grey back into phase.

    ``level_grey[k]`` is the grey value shown for phase level ``k`` and
    ``level_phase_rad[k]`` the phase it produces. A measured table file is
    recorded by its path and the SHA-256 of its bytes as read for this export.
    """
    lut = grey_map_for(slm)
    entry: dict[str, Any] = {
        "kind": "table" if slm.lut_file else "linear",
        "levels": lut.levels,
        "level_grey": [int(g) for g in lut.level_grey],
        "level_phase_rad": [float(p) for p in lut.level_phase_rad],
        "source_file": None,
        "source_sha256": None,
    }
    if slm.lut_file:
        entry["source_file"] = str(Path(slm.lut_file).absolute())
        entry["source_sha256"] = sha256_file(slm.lut_file)
    return entry


def _frame_entry(fr) -> dict[str, Any]:
    return {
        "index": fr.index,
        "stimulus": fr.stimulus,
        "hologram_index": fr.hologram_index,
        "power_mw": fr.power_mw,
        "target_irradiance_mw_per_mm2": fr.target_irradiance_mw_per_mm2,
        "on_pixel_power_uw": fr.on_pixel_power_uw,
        "mask_on_pixel_power_uw": fr.mask_on_pixel_power_uw,
    }


def iter_grey_stack(plan) -> Iterator[np.ndarray]:
    """The grey image of each distinct hologram, in stack order (one at a time)."""
    for sp in plan.holograms:
        yield sp.hologram.grey


def _write_stack(folder: Path, plan, stack_format: str) -> list[str]:
    written = []
    if stack_format == "tiff":
        import tifffile

        path = folder / "holograms.tif"
        with tifffile.TiffWriter(path) as tif:
            for grey in iter_grey_stack(plan):
                tif.write(grey, contiguous=False, metadata=None)
        written.append(path.name)
    else:
        from PIL import Image

        sub = folder / "holograms"
        sub.mkdir()
        for i, grey in enumerate(iter_grey_stack(plan)):
            name = f"holograms/hologram_{i:03d}.png"
            Image.fromarray(grey).save(folder / name)
            written.append(name)
    return written


def _write_timeline(folder: Path, plan) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(TIMELINE_COLUMNS)
    for fr in plan.frames:
        w.writerow(
            [
                fr.index,
                f"{fr.start_ms:.6f}",
                f"{fr.duration_ms:.6f}",
                f"{fr.pulse_ms:.6f}",
                f"{fr.rate_hz:.9g}",
                f"{fr.power_mw:.9g}",
                fr.hologram_index,
                "" if fr.stimulus is None else fr.stimulus,
                f"{fr.pulse_delay_ms:.6f}",
            ]
        )
    (folder / "timeline.csv").write_text(buf.getvalue())
    return "timeline.csv"


def _write_events(folder: Path, events) -> str:
    (folder / "events.csv").write_text(events_csv_text(events))
    return "events.csv"


def is_export_folder(path: str | Path) -> bool:
    """True if ``path`` is a folder holding a stimplan export (its manifest names the format)."""
    manifest = Path(path) / "manifest.json"
    try:
        data = json.loads(manifest.read_text())
    except (OSError, ValueError):
        return False
    return isinstance(data, dict) and data.get("format") == EXPORT_FORMAT


def check_export_target(
    output: str | Path, *, force: bool = False, keep: Iterable[str | Path] = ()
) -> Path:
    """Refuse an output folder that an export may not create or replace, before any work.

    An existing path is replaced only with ``force``, and only if it is a folder
    that holds a stimplan export; never a file, a folder of other data, the
    current folder or one of its parents, or a folder holding a path of
    ``keep`` (for example the sequence file). The parent must be writable.

    Raises
    ------
    ExportError
        Naming the output, what was found and what is allowed.
    """
    dst = Path(output).absolute()
    allowed = "a new folder, or with --force a folder that holds a stimplan export"
    if dst.exists() or dst.is_symlink():
        if not force:
            raise ExportError("output", str(dst), allowed, "it exists; pass --force to replace it")
        if not dst.is_dir() or dst.is_symlink():
            raise ExportError("output", str(dst), allowed, "it is a file, not an export folder")
        cwd = Path.cwd().resolve()
        real = dst.resolve()
        if real == cwd or real in cwd.parents:
            raise ExportError("output", str(dst), allowed, "it is the current folder or holds it")
        for k in keep:
            kp = Path(k).resolve()
            if kp == real or real in kp.parents:
                raise ExportError("output", str(dst), allowed, f"it holds {kp}")
        if not is_export_folder(dst):
            raise ExportError(
                "output",
                str(dst),
                allowed,
                "it holds no stimplan export (no manifest.json of this format); "
                "--force replaces only an earlier export",
            )
    check_writable_location(dst)
    return dst


def check_writable_location(path: str | Path) -> None:
    """Refuse a path whose nearest existing parent is not a folder one can write to."""
    dst = Path(path).absolute()
    parent = dst.parent
    while not parent.exists() and parent != parent.parent:
        parent = parent.parent
    if not parent.is_dir() or not os.access(parent, os.W_OK | os.X_OK):
        raise ExportError(
            "output", str(dst), "a location you can write to", f"{parent} is not writable"
        )


def export_plan(
    plan,
    output: str | Path,
    *,
    force: bool = False,
    stack_format: str = "tiff",
    acknowledge_reason: str | None = None,
    fail_after: str | None = None,
) -> Path:
    """Write an export folder for a plan.

    Parameters
    ----------
    plan : Plan
    output : path
        The folder to create.
    force : bool
        Replace an existing folder.
    stack_format : {"tiff", "png"}
        One multi-page TIFF, or one PNG per hologram.
    acknowledge_reason : str, optional
        Required when the exposure verdict is "above": why the user exports
        anyway. It is recorded in the manifest.
    fail_after : str, optional
        Testing hook: raise after writing this part ("stack", "timeline",
        "events").

    Returns
    -------
    Path
        The export folder.

    Raises
    ------
    ExposureLimitError
        If the plan is above a limit and no acknowledgement is given.
    ExportError
        If ``output`` exists and ``force`` is false, or exists and is not an
        earlier export (:func:`check_export_target`).
    """
    if stack_format not in STACK_FORMATS:
        raise ConfigError("stack_format", stack_format, "one of 'tiff', 'png'")
    source = getattr(plan.spec, "source_path", None)
    check_export_target(output, force=force, keep=() if source is None else (source,))
    ack = None
    if plan.verdict == "above":
        if not acknowledge_reason or not str(acknowledge_reason).strip():
            what = plan.exposure.binding_text() if plan.exposure else "no assessment"
            raise ExposureLimitError(
                "exposure",
                what,
                "within the limit, or an acknowledgement with a reason (--acknowledge REASON)",
                "the sequence is estimated above a retinal exposure limit",
            )
        ack = {
            "acknowledged_above_limit": True,
            "reason": str(acknowledge_reason).strip(),
            "user": _user(),
            "time_utc": _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
        }
    t_export = time.perf_counter()
    with atomic_folder(output, force=force) as tmp:
        files = _write_stack(tmp, plan, stack_format)
        if fail_after == "stack":
            raise RuntimeError("simulated failure after the stack")
        files.append(_write_timeline(tmp, plan))
        if fail_after == "timeline":
            raise RuntimeError("simulated failure after the timeline")
        events = pulse_events(plan)
        files.append(_write_events(tmp, events))
        if fail_after == "events":
            raise RuntimeError("simulated failure after the events")
        mask = mask_exposure(plan)
        manifest = {
            "format": EXPORT_FORMAT,
            "stimplan_version": __version__,
            "created_utc": _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
            "title": plan.spec.title,
            "seed": plan.seed,
            "stack_format": stack_format,
            "slm_shape": list(plan.spec.system.slm.shape),
            "grey_dtype": str(plan.holograms[0].hologram.grey.dtype) if plan.holograms else None,
            "config": plan.spec.to_dict(),
            "files": {
                name: {"sha256": sha256_file(tmp / name), "bytes": (tmp / name).stat().st_size}
                for name in files
            },
            "holograms": [_hologram_entry(sp) for sp in plan.holograms],
            "n_frames": len(plan.frames),
            "n_events": len(events),
            "event_columns": list(EVENT_COLUMNS),
            "n_holograms": len(plan.holograms),
            "grey_lookup": _lookup_entry(plan.spec.system.slm),
            "frames": [_frame_entry(fr) for fr in plan.frames],
            "exposure": None if plan.exposure is None else plan.exposure.as_dict(),
            "mask_exposure": None if mask is None else mask.as_dict(),
            "verdict": plan.verdict,
            "acknowledgement": ack,
            # seconds per stage of the plan, and of writing this folder
            "timings_s": {**plan.timings_s, "export": time.perf_counter() - t_export},
            "cautions": CAUTIONS,
        }
        (tmp / "manifest.json").write_text(json.dumps(json_safe(manifest), indent=1))
    return Path(output)


def _user() -> str:
    try:
        return getpass.getuser()
    except Exception:
        return "unknown"


@dataclass(frozen=True)
class ExportBundle:
    """An export folder read back.

    Attributes
    ----------
    path : Path
    manifest : dict
    grey : ndarray
        ``(n_holograms, rows, cols)`` grey values.
    timeline : list of dict
        Rows of ``timeline.csv`` with numeric columns converted.
    events : list of dict
        Rows of ``events.csv`` with numeric columns converted (empty for an
        export written before the file existed).
    """

    path: Path
    manifest: dict
    grey: np.ndarray
    timeline: list[dict[str, Any]]
    events: tuple[dict[str, Any], ...] | list[dict[str, Any]] = ()

    @property
    def verdict(self) -> str:
        return self.manifest.get("verdict", "unknown")


def load_export(path: str | Path, *, verify: bool = True) -> ExportBundle:
    """Read an export folder (or its ``manifest.json``) and verify its checksums.

    Raises
    ------
    InputFileError
        If the folder or manifest is missing or malformed.
    IntegrityError
        If a file is missing or its SHA-256 differs from the manifest.
    """
    p = Path(path)
    if p.is_file() and p.name == "manifest.json":
        p = p.parent
    mpath = p / "manifest.json"
    if not mpath.is_file():
        raise InputFileError("export", str(p), "an export folder with manifest.json")
    try:
        manifest = json.loads(mpath.read_text())
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputFileError("export.manifest", str(mpath), "valid JSON", str(exc)) from None
    if not isinstance(manifest, dict) or manifest.get("format") != EXPORT_FORMAT:
        raise InputFileError(
            "export.manifest.format",
            manifest.get("format") if isinstance(manifest, dict) else None,
            repr(EXPORT_FORMAT),
        )
    files = manifest.get("files", {})
    if verify:
        for name, meta in files.items():
            fp = p / name
            if not fp.is_file():
                raise IntegrityError(
                    f"export.files[{name!r}]", str(fp), "a file listed in the manifest", "missing"
                )
            digest = sha256_file(fp)
            if digest != meta.get("sha256"):
                raise IntegrityError(
                    f"export.files[{name!r}]",
                    digest[:16] + "…",
                    f"SHA-256 {str(meta.get('sha256'))[:16]}… from the manifest",
                    "the file was changed after export",
                )
    grey = _read_stack(p, manifest)
    timeline = []
    with open(p / "timeline.csv", newline="") as fh:
        for row in csv.DictReader(fh):
            timeline.append(
                {
                    "index": int(row["index"]),
                    "start_ms": float(row["start_ms"]),
                    "duration_ms": float(row["duration_ms"]),
                    "pulse_ms": float(row["pulse_ms"]),
                    "rate_hz": float(row["rate_hz"]),
                    "power_mw": float(row["power_mw"]),
                    "hologram_index": int(row["hologram_index"]),
                    "stimulus": row["stimulus"] or None,
                    "pulse_delay_ms": float(row.get("pulse_delay_ms") or 0.0),
                }
            )
    return ExportBundle(p, manifest, grey, timeline, _read_events(p / "events.csv"))


def _read_events(path: Path) -> list[dict[str, Any]]:
    if not path.is_file():
        return []
    out = []
    with open(path, newline="") as fh:
        for row in csv.DictReader(fh):
            out.append(
                {
                    "start_ms": float(row["start_ms"]),
                    "width_ms": float(row["width_ms"]),
                    "laser_power_mw": float(row["laser_power_mw"]),
                    "hologram_index": int(row["hologram_index"]),
                    "condition": int(row["condition"]),
                    "frame_index": int(row["frame_index"]),
                    "stimulus": row["stimulus"],
                }
            )
    return out


def _read_stack(p: Path, manifest: dict) -> np.ndarray:
    n = len(manifest.get("holograms", []))
    shape = tuple(manifest.get("slm_shape", (0, 0)))
    if n == 0:
        return np.zeros((0, *shape), np.uint8)
    if manifest.get("stack_format") == "png":
        from PIL import Image

        pages = [np.asarray(Image.open(p / f"holograms/hologram_{i:03d}.png")) for i in range(n)]
        return np.stack(pages)
    import tifffile

    arr = tifffile.imread(p / "holograms.tif")
    return arr.reshape(n, *shape)

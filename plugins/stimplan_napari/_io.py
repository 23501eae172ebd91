"""Readers (sequence files, export folders) and the export writer of the plugin.

Readers follow npe2's contract: ``get_*_reader(path)`` returns ``None`` for
anything that is not theirs (never raises) and otherwise a function that
returns layer data tuples.
"""

from __future__ import annotations

import json
import re
import tomllib
from pathlib import Path
from typing import Any

from napari.utils.notifications import show_warning

from stimplan.errors import ConfigError, StimplanError
from stimplan.plan import plan_sequence
from stimplan.plan.memory import check_memory
from stimplan.present.export import export_plan, load_export
from stimplan.present.replay import replay_export
from stimplan.sequence import load_sequence

from ._layers import PLAN_KEY, RESULT_KEY, export_layers, plan_layers
from ._readout import announce, announce_export

__all__ = [
    "is_sequence_file",
    "is_export",
    "get_sequence_reader",
    "read_sequence",
    "get_export_reader",
    "read_export",
    "write_export",
]

_SEQUENCE_FORMAT = "stimplan-sequence/1"
_EXPORT_FORMAT = "stimplan-export/1"
_MAX_TOML_BYTES = 1 << 20
# A file that means to be a sequence but is not valid TOML: let the sequence
# reader report its errors (with lines) instead of being silently skipped.
_FORMAT_LINE = re.compile(r"""^\s*format\s*=\s*["']stimplan-sequence/""", re.MULTILINE)


def _one_path(path: Any) -> str | None:
    if isinstance(path, (list, tuple)):
        if len(path) != 1:
            return None
        path = path[0]
    try:
        return str(Path(path))
    except TypeError:
        return None


def is_sequence_file(path: str | Path) -> bool:
    """Whether ``path`` is a stimplan sequence file (TOML, ``format = "stimplan-sequence/1"``)."""
    p = Path(path)
    try:
        if p.suffix.lower() != ".toml" or not p.is_file() or p.stat().st_size > _MAX_TOML_BYTES:
            return False
        raw = p.read_bytes()
    except OSError:
        return False
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, tomllib.TOMLDecodeError):
        return bool(_FORMAT_LINE.search(raw.decode("utf-8", errors="replace")))
    return isinstance(data, dict) and data.get("format") == _SEQUENCE_FORMAT


def _manifest_path(path: str | Path) -> Path | None:
    p = Path(path)
    if p.is_dir():
        p = p / "manifest.json"
    if p.name != "manifest.json" or not p.is_file():
        return None
    return p


def is_export(path: str | Path) -> bool:
    """Whether ``path`` is a stimplan export folder or its ``manifest.json``."""
    m = _manifest_path(path)
    if m is None:
        return False
    try:
        with open(m, "rb") as fh:
            head = fh.read(4096).decode("utf-8", errors="replace")
        if _EXPORT_FORMAT not in head:
            data = json.loads(m.read_text(encoding="utf-8"))
            return isinstance(data, dict) and data.get("format") == _EXPORT_FORMAT
    except (OSError, json.JSONDecodeError, UnicodeDecodeError):
        return False
    return True


def get_sequence_reader(path):
    """npe2 reader hook for ``*.toml``: the sequence reader, or ``None`` for other TOML."""
    p = _one_path(path)
    if p is None or not is_sequence_file(p):
        return None
    return read_sequence


def read_sequence(path) -> list[tuple]:
    """Plan a sequence file and return its layers (per-frame retina with a time axis, ...).

    Warnings (limits exceeded, a clipped beam) are shown to the user.
    """

    p = _one_path(path)
    spec = load_sequence(p)
    check_memory(spec)
    plan = plan_sequence(spec, progress=True)
    announce(plan)
    layers = plan_layers(plan)
    return layers or [(None,)]


def get_export_reader(path):
    """npe2 reader hook for export folders and their ``manifest.json``; ``None`` otherwise."""
    p = _one_path(path)
    if p is None or not is_export(p):
        return None
    return read_export


def read_export(path) -> list[tuple]:
    """Read an export (checksums verified): its retina predicted again from the grey
    levels it holds, the implant and the per-frame SLM grey levels.

    If the configuration no longer validates (a lookup table it names has
    moved, say), a warning says so and only the grey levels are shown.
    """

    bundle = load_export(_one_path(path))
    announce_export(bundle)
    try:
        replay = replay_export(bundle)
    except StimplanError as exc:
        show_warning(f"stimplan: the export's retina cannot be predicted again: {exc}")
        replay = None
    return export_layers(bundle, replay)


def _plan_of(meta: dict) -> Any:
    md = meta.get("metadata") or {}
    if PLAN_KEY in md:
        return md[PLAN_KEY]
    if RESULT_KEY in md:
        return md[RESULT_KEY].plan
    return None


def write_export(path: str, layer_data: list[tuple]) -> list[str]:
    """npe2 writer: export the plan behind the given layers (the first layer that has one).

    The folder is written atomically and never replaces an existing one. A
    plan estimated above a limit is refused here; the sequence panel's export
    takes the acknowledgement and its reason.

    Parameters
    ----------
    path : str
        The export folder to create.
    layer_data : list of (data, meta, layer_type)

    Returns
    -------
    list of str
        ``[path]``.

    Raises
    ------
    ConfigError
        If no layer carries a stimplan plan.
    ExposureLimitError
        If the plan is above a limit.
    """

    plan = None
    for item in layer_data:
        plan = _plan_of(item[1])
        if plan is not None:
            break
    if plan is None:
        raise ConfigError(
            "layers",
            [item[1].get("name") for item in layer_data],
            "a layer made by stimplan (a sequence or a computed stimulus)",
        )
    out = export_plan(plan, path)
    return [str(out)]

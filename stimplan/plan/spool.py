"""Large per-stimulus arrays kept on disk while a plan is alive (the spool); the plan's units.

A plan planned with ``store="disk"`` writes each hologram's large parts into a
temporary folder: every large array as a ``.npy`` file, read back memory-mapped,
the rest as a small pickle. The plan removes the folder on ``close()``.
"""

from __future__ import annotations

import copy
import dataclasses
import json
import os
import pickle

import numpy as np

__all__ = [
    "REFERENCE_POWER_MW",
    "MEMORY_BUDGET_MB",
    "BYTES_PER_SLM_PIXEL",
    "stimulus_key",
    "Spooled",
    "spooled_value",
]


REFERENCE_POWER_MW = 1.0


#: Above this estimate of the per-hologram arrays, ``store="auto"`` spools them to disk.
MEMORY_BUDGET_MB = 1024.0


#: Bytes per SLM pixel that one hologram's parts take in memory (phase, levels, grey,
#: target and regions on the design grid; prediction and mask maps on the 2x grid).
BYTES_PER_SLM_PIXEL = 48


def stimulus_key(stimulus) -> str:
    """A canonical text of a stimulus's parameters: equal keys, equal holograms."""
    return json.dumps(stimulus.to_dict(), sort_keys=True, default=str)


#: Arrays at least this large are written as their own ``.npy`` file and read back
#: memory-mapped; smaller ones stay in the object's pickle.
NPY_MIN_BYTES = 64 * 1024


class _Npy:
    """Where a spooled array lives (a ``.npy`` file)."""

    __slots__ = ("path",)

    def __init__(self, path: str) -> None:
        self.path = path


def _split(obj, folder: str, stem: str, files: list[str]):
    """``obj`` with every large array of it (and of the dataclasses it holds) written
    to a ``.npy`` file and replaced by an :class:`_Npy`."""
    if isinstance(obj, np.ndarray) and obj.nbytes >= NPY_MIN_BYTES and obj.dtype != object:
        path = os.path.join(folder, f"{stem}.npy")
        np.save(path, obj, allow_pickle=False)
        files.append(path)
        return _Npy(path)
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        out = copy.copy(obj)
        for f in dataclasses.fields(obj):
            value = getattr(obj, f.name)
            split = _split(value, folder, f"{stem}.{f.name}", files)
            if split is not value:
                object.__setattr__(out, f.name, split)
        return out
    return obj


def _join(obj):
    """Inverse of :func:`_split`: arrays memory-mapped copy-on-write (a change stays in
    memory and never reaches the file)."""
    if isinstance(obj, _Npy):
        return np.load(obj.path, mmap_mode="c", allow_pickle=False)
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        out = obj
        for f in dataclasses.fields(obj):
            value = getattr(obj, f.name)
            joined = _join(value)
            if joined is not value:
                if out is obj:
                    out = copy.copy(obj)
                object.__setattr__(out, f.name, joined)
        return out
    return obj


class Spooled:
    """A large result kept in the plan's spool folder, loaded on use.

    Its arrays are ``.npy`` files read back with ``mmap_mode`` (pages are read
    when touched); the rest of the object is a small pickle beside them.
    """

    __slots__ = ("path",)

    def __init__(self, path: str) -> None:
        self.path = path

    @classmethod
    def write(cls, obj, folder: str, name: str) -> Spooled:
        files: list[str] = []
        shell = _split(obj, folder, name, files)
        path = os.path.join(folder, f"{name}.pkl")
        with open(path, "wb") as fh:
            pickle.dump(shell, fh, protocol=pickle.HIGHEST_PROTOCOL)
        return cls(path)

    def load(self):
        # the files were written by this process's plan into its own temporary folder
        with open(self.path, "rb") as fh:
            return _join(pickle.load(fh))


def spooled_value(value):
    return value.load() if isinstance(value, Spooled) else value

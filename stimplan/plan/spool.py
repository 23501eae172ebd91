"""Large per-stimulus arrays kept on disk while a plan is alive (the spool); the plan's units."""

from __future__ import annotations

import json
import os
import pickle

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


class Spooled:
    """A large result kept in a file of the plan's spool folder, loaded on use."""

    __slots__ = ("path",)

    def __init__(self, path: str) -> None:
        self.path = path

    @classmethod
    def write(cls, obj, folder: str, name: str) -> Spooled:
        path = os.path.join(folder, name)
        with open(path, "wb") as fh:
            pickle.dump(obj, fh, protocol=pickle.HIGHEST_PROTOCOL)
        return cls(path)

    def load(self):
        # the file was written by this process's plan into its own temporary folder
        with open(self.path, "rb") as fh:
            return pickle.load(fh)


def spooled_value(value):
    return value.load() if isinstance(value, Spooled) else value

"""Plans whose holograms are spooled to disk export the same files as in-memory plans."""

from __future__ import annotations

import json

from stimplan.plan import plan_sequence
from stimplan.present.export import export_plan, sha256_file
from stimplan.sequence import parse_sequence

from .scenarios import small_sequence


def test_streaming_export_writes_the_same_files(tmp_path):
    # common practice: where data are kept must not change what is written
    spec = parse_sequence(small_sequence())
    in_memory = plan_sequence(spec, progress=False, store="memory")
    spooled = plan_sequence(spec, progress=False, store="disk")
    assert spooled.holograms[0].spooled and not in_memory.holograms[0].spooled
    a = export_plan(in_memory, tmp_path / "memory")
    b = export_plan(spooled, tmp_path / "disk")
    for name in ("holograms.tif", "timeline.csv", "events.csv"):
        assert sha256_file(a / name) == sha256_file(b / name)
    ma = json.loads((a / "manifest.json").read_text())
    mb = json.loads((b / "manifest.json").read_text())
    for m in (ma, mb):  # the time of writing and the seconds each stage took differ
        m.pop("created_utc")
        m.pop("timings_s")
    assert ma == mb
    spool = spooled.spool.name
    del spooled
    import gc
    import os

    gc.collect()
    assert not os.path.exists(spool)  # the spool folder goes with its plan

"""The `stimplan` command: demo, exit codes, no overwrite without --force."""

from __future__ import annotations

import json

from stimplan.cli import main


def test_demo_writes_results_and_refuses_overwrite(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out), "--quick"]) == 0
    text = capsys.readouterr().out
    assert "efficiency" in text and "hologram gain over mask" in text
    summary = json.loads((out / "summary.json").read_text())
    acc = summary["power_account_mw"]
    parts = [v for k, v in acc.items() if k not in ("input_mw", "signal_mw", "elsewhere_mw")]
    assert abs(sum(parts) - acc["input_mw"]) < 1e-3 * acc["input_mw"]  # conservation of energy
    # common practice: never overwrite without an explicit flag; exit code 1, one line
    assert main(["demo", "-o", str(out), "--quick"]) == 1
    err = capsys.readouterr().err
    assert "--force" in err and len(err.strip().splitlines()) == 1
    assert main(["demo", "-o", str(out), "--quick", "--force"]) == 0
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]

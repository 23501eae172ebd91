"""The `stimplan` command: demo, check, export, report; exit codes; no overwrite."""

from __future__ import annotations

import json

import pytest

from stimplan.cli import main
from stimplan.present.export import load_export

from .scenarios import gui_sequence, small_sequence


@pytest.fixture
def seq(tmp_path):
    p = tmp_path / "small.toml"
    p.write_text(small_sequence())
    return p


@pytest.fixture
def tiny(tmp_path):
    """A 128-pixel SLM sequence, for the tests of the command's mechanics."""
    p = tmp_path / "small.toml"
    p.write_text(gui_sequence(power=0.5))
    return p


def test_demo_writes_export_and_report(tmp_path, capsys):
    out = tmp_path / "demo"
    assert main(["demo", "-o", str(out), "--quick"]) == 0
    text = capsys.readouterr().out
    for word in ("effic.", "ON µW holo", "ON µW mask", "ON CV", "exposure", "verdict"):
        assert word in text
    assert "not a safety approval" in text
    assert (out / "report.html").is_file()
    bundle = load_export(out / "export")
    assert bundle.manifest["verdict"] == "within"
    # common practice: never overwrite without an explicit flag; exit code 1, one line
    assert main(["demo", "-o", str(out), "--quick"]) == 1
    err = capsys.readouterr().err
    assert "--force" in err and len(err.strip().splitlines()) == 1
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_check_json_has_the_documented_keys(seq, capsys):
    assert main(["check", str(seq), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert {"stimuli", "exposure", "cautions"} <= set(data)
    for s in data["stimuli"]:
        assert {"name", "efficiency", "on_pixel_power_uw", "on_pixel_cv"} <= set(s)
        assert {"resolvable", "warnings", "finest_detail_um"} <= set(s)
        assert {"gain_factors", "gain_over_mask", "light_budget"} <= set(s)
        assert isinstance(s["warnings"], list)
        assert {"hologram", "mask"} <= set(s["on_pixel_power_uw"])
        assert s["on_pixel_power_uw"]["hologram"] > s["on_pixel_power_uw"]["mask"]
        # Source: REFERENCES [der]: the mask needs (eta_holo/T_mask)(A_field/A_lit) times
        # the power for the same irradiance on the lit pixels, far more than the hologram
        assert s["mask_laser_power_mw"] > 5 * s["laser_power_mw"]
    assert data["exposure"]["verdict"] in ("within", "above")
    assert {"worst_ratio", "binding_rule"} <= set(data["exposure"])
    limits = data["exposure"]["max_peak_frame_power_mw"]
    assert float(limits["hologram"]) > 0 and float(limits["mask"]) > 0
    assert "estimate" in data["cautions"]


def test_invalid_input_exits_1_naming_the_key(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(small_sequence().replace("wavelength_nm = 880", "wavelength_nm = -5"))
    assert main(["check", str(bad)]) == 1
    err = capsys.readouterr().err.strip()
    assert "wavelength_nm" in err and "Traceback" not in err
    assert len(err.splitlines()) == 1


def test_each_error_has_its_own_line(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    text = small_sequence().replace("wavelength_nm = 880", "wavelength_nm = -5")
    bad.write_text(text.replace("pitch_um = 8.0", 'pitch_um = "8"'))
    assert main(["check", str(bad)]) == 1
    lines = capsys.readouterr().err.strip().splitlines()
    # a heading that says where, then one line for each of the two errors
    assert len(lines) == 3 and all(ln.startswith("stimplan: error: ") for ln in lines)
    assert "2 errors" in lines[0]
    assert sum("wavelength_nm" in ln for ln in lines) == 1
    assert sum("pitch_um" in ln for ln in lines) == 1


def test_summary_without_an_implant_says_there_is_no_mask_comparison(tmp_path, capsys):
    seq = tmp_path / "no_implant.toml"
    text = small_sequence().replace('[implant]\npreset = "rat_55um"\n', "")
    text = text.replace("bar_width_px = 2", "bar_width_um = 110")
    seq.write_text(text.replace("irradiance_mw_per_mm2 = 1.0", "power_mw = 1.0"))
    assert main(["check", str(seq)]) == 0
    out = capsys.readouterr().out
    assert "no mask comparison" in out and "needs  for" not in out


def test_over_limit_export_exits_2_and_acknowledgement_is_recorded(tmp_path, capsys):
    hot = tmp_path / "hot.toml"
    hot.write_text(small_sequence(irradiance=5000.0))
    out = tmp_path / "exp"
    assert main(["export", str(hot), "-o", str(out)]) == 2
    assert "acknowledge" in capsys.readouterr().err
    assert not out.exists()
    reason = "optics bench, power meter only"
    assert main(["export", str(hot), "-o", str(out), "--acknowledge", reason]) == 0
    assert load_export(out).manifest["acknowledgement"]["reason"] == reason


def test_report_command_and_overwrite(tiny, tmp_path):
    out = tmp_path / "r.html"
    assert main(["report", str(tiny), "-o", str(out)]) == 0
    assert "not a safety approval" in out.read_text()
    assert main(["report", str(tiny), "-o", str(out)]) == 1
    assert main(["report", str(tiny), "-o", str(out), "--force"]) == 0


def test_version_and_help(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert "stimplan" in capsys.readouterr().out
    for cmd in ("demo", "check", "export", "report", "preview"):
        with pytest.raises(SystemExit) as info:
            main([cmd, "--help"])
        assert info.value.code == 0
        assert "usage" in capsys.readouterr().out


def test_usage_errors_exit_1_not_the_refusal_code(capsys):
    # common practice: one exit-code table; 2 is kept for the exposure refusal
    with pytest.raises(SystemExit) as ex:
        main(["check"])
    assert ex.value.code == 1
    with pytest.raises(SystemExit) as ex:
        main(["nonsense"])
    assert ex.value.code == 1
    with pytest.raises(SystemExit):
        main(["--help"])
    assert "130" in capsys.readouterr().out


def test_check_json_prints_json_on_errors(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(small_sequence().replace("wavelength_nm = 880", "wavelength_nm = 1310"))
    assert main(["check", str(bad), "--json"]) == 1
    out = json.loads(capsys.readouterr().out)
    assert out["exit_code"] == 1
    assert out["error"]["key"] == "optics.laser.wavelength_nm"
    assert out["error"]["line"] == bad.read_text().splitlines().index("wavelength_nm = 1310") + 1
    assert "1310" in out["error"]["message"]


def test_unwritable_output_exits_1_and_interrupt_exits_130(seq, tmp_path, capsys, monkeypatch):
    blocker = tmp_path / "afile.txt"
    blocker.write_text("x")
    assert main(["report", str(seq), "-o", str(blocker / "r.html")]) == 1
    assert "internal" not in capsys.readouterr().err
    assert main(["report", str(seq), "-o", str(tmp_path)]) == 1  # a folder: refused at once
    assert "it is a folder" in capsys.readouterr().err

    def interrupted(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr("stimplan.cli._load_and_plan", interrupted)
    assert main(["check", str(seq)]) == 130


def test_memory_estimate_refuses_before_computing(tmp_path, capsys, monkeypatch):
    # Source: 8192^2 SLM pixels x oversample^2 = 64 are 4.3e9 retinal samples; a float32
    # map alone is 16 GiB (4 bytes each), beyond this machine and the default share.
    big = tmp_path / "big.toml"
    text = small_sequence().replace("pixels_x = 256", "pixels_x = 8192")
    text = text.replace("pixels_y = 256", "pixels_y = 8192")
    big.write_text(text.replace("iterations = 30\n", "iterations = 30\noversample = 8\n"))

    def never(*a, **k):
        raise AssertionError("planning started")

    monkeypatch.setattr("stimplan.plan.plan_sequence", never)
    assert main(["check", str(big), "--json"]) == 1
    err = json.loads(capsys.readouterr().out)["error"]
    assert err["key"] == "hologram.oversample"
    assert "GiB" in err["message"] and "--max-memory-gb" in err["message"]
    # an explicit, higher limit lets it through to planning (stopped here by an interrupt)

    def interrupted(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr("stimplan.plan.plan_sequence", interrupted)
    assert main(["check", str(big), "--max-memory-gb", "1e9"]) == 130
    capsys.readouterr()
    with pytest.raises(SystemExit) as ex:  # common practice: a usage error exits 1
        main(["check", str(big), "--max-memory-gb", "-3"])
    assert ex.value.code == 1
    assert "positive number of GiB" in capsys.readouterr().err


def _sigint(*a, **k):
    """Deliver a real SIGINT to this process (Python raises KeyboardInterrupt at once)."""
    import os
    import signal

    os.kill(os.getpid(), signal.SIGINT)


def test_sigint_during_planning_exits_130(tiny, tmp_path, capsys, monkeypatch):
    # common practice: 130 = 128 + SIGINT (2); nothing written
    monkeypatch.setattr("stimplan.plan.run.run_batch", _sigint)
    assert main(["export", str(tiny), "-o", str(tmp_path / "exp"), "--quiet"]) == 130
    assert "interrupted" in capsys.readouterr().err
    assert not (tmp_path / "exp").exists()


def test_sigint_during_writing_keeps_the_old_export_and_leaves_no_partial(
    tiny, tmp_path, capsys, monkeypatch
):
    # common practice: the new export is written beside and renamed in; an interrupt
    # leaves the old one whole and no folder that looks complete
    out = tmp_path / "exp"
    assert main(["export", str(tiny), "-o", str(out), "--quiet"]) == 0
    before = sorted((q.name, q.read_bytes()) for q in out.iterdir())
    monkeypatch.setattr("stimplan.present.export.sha256_file", _sigint)
    assert main(["export", str(tiny), "-o", str(out), "--force", "--quiet"]) == 130
    capsys.readouterr()
    assert sorted((q.name, q.read_bytes()) for q in out.iterdir()) == before
    assert sorted(q.name for q in tmp_path.iterdir()) == ["exp", "small.toml"]
    assert main(["export", str(tiny), "-o", str(tmp_path / "new"), "--quiet"]) == 130
    assert not (tmp_path / "new").exists()


def test_preview_without_a_display_exits_1_instead_of_aborting(seq, capsys, monkeypatch):
    # common practice: Qt aborts the process (SIGABRT, exit 134) without a display
    for name in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM"):
        monkeypatch.delenv(name, raising=False)
    assert main(["preview", str(seq)]) == 1
    err = capsys.readouterr().err
    assert "display" in err and "xvfb-run" in err


def test_progress_reports_every_stage_and_is_quiet_off_a_terminal(tiny, capsys):
    # common practice: progress goes to stderr, stage by stage, and not into pipes
    from stimplan.plan import plan_sequence
    from stimplan.plan.evaluate import mask_exposure
    from stimplan.sequence import load_sequence

    seen = []
    plan = plan_sequence(load_sequence(tiny), progress=lambda *a: seen.append(a))
    assert mask_exposure(plan) is not None  # run when asked for
    stages = [s for s, _, _ in seen]
    assert stages[0] == "holograms" and "exposure" in stages and "mask exposure" in stages
    done, total = max((d, t) for s, d, t in seen if s == "holograms")
    assert done == total > 0
    assert all(t == 0 for s, _, t in seen if s != "holograms")  # unknown in advance
    assert main(["check", str(tiny)]) == 0
    assert capsys.readouterr().err == ""  # stderr is not a terminal here


@pytest.mark.parametrize(
    ("exc", "code", "text"),
    [(RuntimeError("a bug"), 3, "internal error"), (MemoryError(), 1, "out of memory")],
)
def test_a_bug_exits_3_and_memory_exhaustion_exits_1(tiny, capsys, monkeypatch, exc, code, text):
    # common practice: the documented exit-code table (stimplan --help)
    def broken(*a, **k):
        raise exc

    monkeypatch.setattr("stimplan.cli._load_and_plan", broken)
    assert main(["check", str(tiny), "--json"]) == code
    assert json.loads(capsys.readouterr().out)["exit_code"] == code
    assert main(["check", str(tiny)]) == code
    assert text in capsys.readouterr().err


HUMAN_RINGS = """
format = "stimplan-sequence/1"
title = "two Landolt rings on the clinical array (demo values)"

[optics.slm]
pixels_x = 128
pixels_y = 128
pitch_um = 8.0
fill_factor = 0.93

[optics.laser]
wavelength_nm = 880
power_mw = 1.0
waist_mm = 0.33

[optics.relay]
magnification = 0.5

[eye]
preset = "human"

[implant]
preset = "human_100um"

[hologram]
iterations = 5

[stimuli.ring_11]
kind = "landolt"
logmar = 1.1

[stimuli.ring_19]
kind = "landolt"
logmar = 1.9

[[steps]]
stimulus = "ring_11"
duration_ms = 100
pulse_ms = 10
rate_hz = 10

[[steps]]
stimulus = "ring_19"
duration_ms = 100
pulse_ms = 10
rate_hz = 10
"""


def test_check_flags_a_landolt_c_finer_than_the_clinical_array(tmp_path, capsys):
    # logMAR 1.1: MAR 10^1.1 = 12.6 arcmin; its gap (one MAR) on the human eye's
    # 288 µm/deg is 12.6/60 * 288 = 60 µm, under the 100 µm pitch: flagged. logMAR 1.9:
    # 79.4 arcmin, a 381 µm gap: resolved. Sources: Bailey & Lovie (1976) (logMAR);
    # ISO 8596 (the gap is one MAR); Drasdo & Fowler (1974) (288 µm/deg); Lorach et al.
    # (2015) (the sampling limit is one pixel pitch).
    path = tmp_path / "rings.toml"
    path.write_text(HUMAN_RINGS)
    assert main(["check", str(path), "--json"]) == 0
    rows = {s["name"]: s for s in json.loads(capsys.readouterr().out)["stimuli"]}
    assert rows["ring_11"]["resolvable"] is False and rows["ring_11"]["warnings"]
    assert rows["ring_11"]["finest_detail_um"] == pytest.approx(10**1.1 / 60 * 288.0, rel=1e-6)
    assert rows["ring_19"]["resolvable"] is True and not rows["ring_19"]["warnings"]


def test_verbose_prints_the_time_of_each_stage_and_the_manifest_records_it(tiny, tmp_path, capsys):
    # common practice: a user sees where the time goes
    assert main(["check", str(tiny), "--quiet", "--verbose"]) == 0
    err = capsys.readouterr().err
    line = next(t for t in err.splitlines() if t.startswith("timings: "))
    for stage in ("holograms", "predictions", "readouts", "exposure"):
        assert f"{stage} " in line
    out = tmp_path / "exp"
    assert main(["export", str(tiny), "-o", str(out), "--quiet", "--verbose"]) == 0
    assert "export " in capsys.readouterr().err
    timings = json.loads((out / "manifest.json").read_text())["timings_s"]
    assert {"holograms", "predictions", "readouts", "exposure", "export"} <= set(timings)
    assert all(v >= 0 for v in timings.values())


def test_a_scheduler_option_that_is_no_address_is_a_usage_error(seq, capsys):
    with pytest.raises(SystemExit) as err:
        main(["check", str(seq), "--scheduler", "cluster-one"])
    assert err.value.code == 1
    assert "tcp://host:port" in capsys.readouterr().err

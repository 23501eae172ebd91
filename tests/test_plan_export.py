"""Planning, export, read-back and the report, on a small sequence."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from stimplan.errors import ExportError, ExposureLimitError, IntegrityError
from stimplan.holography import predict_from_levels
from stimplan.holography.quantize import grey_map_for
from stimplan.plan import plan_sequence
from stimplan.plan.evaluate import mask_exposure
from stimplan.present.export import export_plan, load_export
from stimplan.present.report import render_report
from stimplan.sequence import load_sequence

from .scenarios import small_sequence


@pytest.fixture(scope="module")
def seq_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("seq") / "small.toml"
    path.write_text(small_sequence())
    return path


@pytest.fixture(scope="module")
def plan(seq_file):
    return plan_sequence(load_sequence(seq_file), progress=False)


def test_plan_computes_each_distinct_hologram_once(plan):
    # common practice: identical frames share one hologram
    assert len(plan.holograms) == 2
    lit = [f for f in plan.frames if f.lit]
    assert {f.hologram_index for f in lit} == {0, 1}
    assert any(f.stimulus is None for f in plan.frames)  # the blank pause


def test_power_planning_round_trip_through_the_prediction(plan, seq_file):
    # Source: linearity of the optics in laser power (Goodman, 3rd ed., §2.1 and §4.2):
    # plan X mW/mm^2 on the ON pixels, predict anew at the planned power, read X back.
    spec = load_sequence(seq_file)
    frame = next(f for f in plan.frames if f.stimulus == "bars")
    sp = plan.stimuli["bars"]
    from dataclasses import replace

    system = replace(
        spec.system, illumination=replace(spec.system.illumination, power_mw=frame.power_mw)
    )
    pred = predict_from_levels(sp.hologram.levels, system, oversample=spec.oversample)
    read = spec.implant.readout(pred.irradiance_mw_per_mm2, pred.grid)
    on = sp.on
    got = read.power_uw[on].sum() * 1e-3 / read.active_area_mm2[on].sum()
    assert got == pytest.approx(1.0, rel=0.02)


def test_export_round_trip_and_tamper_detection(plan, seq_file, tmp_path):
    # common practice: checksums make a changed file visible; the exported grey levels
    # reproduce the planned per-pixel powers (same optics, same quantisation)
    out = export_plan(plan, tmp_path / "exp")
    bundle = load_export(out)
    man = bundle.manifest
    assert man["seed"] == 3 and man["config"]["seed"] == 3
    assert "estimate" in man["cautions"] and man["verdict"] == "within"
    assert len(bundle.timeline) == len(plan.frames) == man["n_frames"]
    assert man["n_holograms"] == len(plan.holograms) == len(bundle.grey)
    # Source: definition of a linear phase drive (common practice): level k of L shows
    # grey k and gives 2πk/L; the manifest alone turns grey back into phase
    look = man["grey_lookup"]
    assert look["kind"] == "linear" and look["levels"] == 256
    assert look["level_grey"] == list(range(256))
    np.testing.assert_allclose(look["level_phase_rad"], 2 * np.pi * np.arange(256) / 256, atol=1e-6)
    spec = load_sequence(seq_file)
    lut = grey_map_for(spec.system.slm)
    from dataclasses import replace

    system = replace(spec.system, illumination=replace(spec.system.illumination, power_mw=1.0))
    for entry, grey in zip(man["holograms"], bundle.grey, strict=True):
        pred = predict_from_levels(lut.levels_from_grey(grey), system, oversample=spec.oversample)
        power = spec.implant.readout(pred.irradiance_mw_per_mm2, pred.grid).power_uw
        want = np.asarray(entry["pixel_power_uw_per_mw"])
        on = np.asarray(entry["on_pixels"])
        np.testing.assert_allclose(power[on], want[on], rtol=0.01)
    # tamper: one byte of the stack
    stack = out / "holograms.tif"
    data = bytearray(stack.read_bytes())
    data[-10] ^= 0xFF
    stack.write_bytes(bytes(data))
    with pytest.raises(IntegrityError, match="holograms.tif"):
        load_export(out)


def test_manifest_records_a_measured_lookup_table(tmp_path):
    # A table of 512 grey values with phase 2πg/512: level k of 256 (wanted 2πk/256) is
    # served by grey 2k, which gives exactly 2πk/256 (hand count); the checksum is the
    # SHA-256 of the file's bytes. Source: FIPS 180-4 via Python's hashlib.
    import hashlib

    g = np.arange(512)
    table = tmp_path / "lut.csv"
    table.write_text("grey,phase_rad\n" + "".join(f"{k},{2 * np.pi * k / 512:.17g}\n" for k in g))
    seq = tmp_path / "lut.toml"
    seq.write_text(
        small_sequence().replace("phase_levels = 256", 'phase_levels = 256\nlut_file = "lut.csv"')
    )
    plan = plan_sequence(load_sequence(seq), progress=False)
    man = load_export(export_plan(plan, tmp_path / "exp")).manifest
    look = man["grey_lookup"]
    assert look["kind"] == "table" and look["source_file"] == str(table)
    assert look["source_sha256"] == hashlib.sha256(table.read_bytes()).hexdigest()
    assert look["level_grey"] == list(range(0, 512, 2))
    np.testing.assert_allclose(look["level_phase_rad"], 2 * np.pi * np.arange(256) / 256, atol=1e-6)


def test_png_stack_and_manifest_reader(plan, tmp_path):
    out = export_plan(plan, tmp_path / "png", stack_format="png")
    bundle = load_export(out / "manifest.json")
    assert bundle.grey.shape == (2, 256, 256) and bundle.grey.dtype == np.uint8


def test_existing_folder_is_refused_without_force(plan, tmp_path):
    out = tmp_path / "exp"
    export_plan(plan, out)
    with pytest.raises(ExportError, match="--force"):
        export_plan(plan, out)
    export_plan(plan, out, force=True)
    assert load_export(out).verdict == "within"


def _snapshot(folder):
    return sorted(
        (str(q.relative_to(folder)), q.read_bytes()) for q in folder.rglob("*") if q.is_file()
    )


def test_force_replaces_only_an_earlier_export(plan, seq_file, tmp_path, monkeypatch):
    # common practice: --force may replace an earlier export, never other data
    work = tmp_path / "work"
    (work / "data").mkdir(parents=True)
    (work / "data" / "trial1.csv").write_text("t,v\n0,1\n")
    (work / "session.toml").write_text(seq_file.read_text())
    afile = tmp_path / "afile.txt"
    afile.write_text("notes")
    before = _snapshot(tmp_path)
    for target, why in [(work, "no stimplan export"), (afile, "a file")]:
        with pytest.raises(ExportError) as err:
            export_plan(plan, target, force=True)
        assert why in err.value.detail and err.value.field == "output"
    earlier = tmp_path / "earlier"
    export_plan(plan, earlier)
    monkeypatch.chdir(earlier)
    with pytest.raises(ExportError, match="current folder"):
        export_plan(plan, ".", force=True)
    monkeypatch.chdir(tmp_path)
    assert _snapshot(tmp_path) == sorted(before + _snapshot_under(earlier, tmp_path))
    export_plan(plan, earlier, force=True)  # an earlier export is replaced
    assert load_export(earlier).verdict == "within"


def _snapshot_under(folder, root):
    return [(str(q.relative_to(root)), q.read_bytes()) for q in folder.rglob("*") if q.is_file()]


def test_cli_refuses_a_data_folder_before_planning(seq_file, tmp_path, capsys):
    from stimplan.cli import main

    work = tmp_path / "work"
    work.mkdir()
    (work / "keep.txt").write_text("keep")
    assert main(["export", str(seq_file), "-o", str(work), "--force"]) == 1
    assert "no stimplan export" in capsys.readouterr().err
    assert [q.name for q in work.iterdir()] == ["keep.txt"]


def test_interrupted_export_leaves_nothing_that_looks_complete(plan, tmp_path):
    # common practice: write into a temporary sibling, rename at the end
    for stage in ("stack", "timeline"):
        with pytest.raises(RuntimeError):
            export_plan(plan, tmp_path / "exp", fail_after=stage)
        assert not (tmp_path / "exp").exists()
        assert list(tmp_path.iterdir()) == []


def test_over_limit_export_is_refused_unless_acknowledged(tmp_path):
    # Source: REFERENCES (Wang et al. 2022 give 8 mW/mm^2 at 30 % duty as the stated safe
    # maximum); far above it the estimate must be "above" and export must refuse.
    path = tmp_path / "hot.toml"
    path.write_text(small_sequence(irradiance=5000.0))
    plan = plan_sequence(load_sequence(path), progress=False)
    assert plan.verdict == "above"
    with pytest.raises(ExposureLimitError):
        export_plan(plan, tmp_path / "exp")
    assert not (tmp_path / "exp").exists()
    export_plan(plan, tmp_path / "exp", acknowledge_reason="bench test with a power meter, no eye")
    ack = json.loads((tmp_path / "exp" / "manifest.json").read_text())["acknowledgement"]
    assert ack["acknowledged_above_limit"] is True
    assert "power meter" in ack["reason"]


def test_report_is_self_contained_with_cautions(plan):
    text = render_report(plan)
    assert text.startswith("<!doctype html>")
    images = text.count("data:image/png;base64,") + text.count("data:image/jpeg;base64,")
    assert images >= 5
    assert "not a safety approval" in text
    assert "src='http" not in text and 'src="http' not in text
    assert "photodiode irradiance against the stimulation threshold" in text


def test_report_speaks_in_labels_with_units_and_defines_its_terms(plan):
    # common practice: a reader sees labels and units, one notation, and defined terms
    import re

    text = render_report(plan)
    visible = re.sub(r"data:image/[a-z]+;base64,[A-Za-z0-9+/=]+", "", text)
    for raw in ("sample_pitch_x_um", "overfills_pupil", "wavelength_nm", "mW/mm^2", "alpha ="):
        assert raw not in visible, raw
    assert "beam overfills the pupil" in visible and "retinal sample pitch, x" in visible
    for term in ("uniformity", "RMS error", "speckle contrast", "CV"):
        assert f"<b>{term}</b>:" in visible
    assert "light budget" in visible and "of the deliverable" in visible
    assert "efficiency × area × coverage" in visible


def test_check_json_gives_the_implant_view_against_the_published_range(plan):
    # Source: Mathieson et al., Nat. Photonics 6(6), 391-397 (2012), abstract: threshold
    # peak irradiance 0.2-10 mW/mm². The grating is planned for 1 mW/mm² mean on its ON
    # photodiodes (the sequence's irradiance target, CV about 1 %), under the high end,
    # so every ON pixel may not stimulate.
    from stimplan.present.summary import plan_summary

    s = plan_summary(plan)
    view = next(r for r in s["stimuli"] if r["name"] == "bars")["implant_view"]
    assert view["threshold_mw_per_mm2"] == [0.2, 10.0] and "Mathieson" in view["source"]
    assert view["on_pixels"] > 0 and view["on_below"] == view["on_pixels"]
    assert view["on_pixels"] + view["off_pixels"] == plan.spec.implant.n_pixels
    assert "cautions" in s


def test_mask_exposure_at_equal_irradiance_scales_with_its_power(tmp_path):
    # Source: linearity of retinal exposure in laser power: the mask shown at the power
    # that matches the hologram's ON-pixel irradiance has its same-power ratio times
    # P_mask / P_hologram.
    path = tmp_path / "one.toml"
    text = small_sequence()
    path.write_text(text[: text.index("[[steps]]", text.index("[[steps]]") + 1)])
    plan = plan_sequence(load_sequence(path), progress=False)
    assert len(plan.holograms) == 1
    frame = next(f for f in plan.frames if f.lit)
    factor = plan.mask_power_for(frame) / frame.power_mw
    assert factor > 5  # the mask throws light away
    same = mask_exposure(plan).worst_ratio
    equal = mask_exposure(plan, equal_irradiance=True).worst_ratio
    assert equal == pytest.approx(same * factor, rel=1e-6)


def test_a_spooled_plan_removes_its_folder_on_close(tmp_path):
    # common practice: a temporary folder lives as long as its owner and no longer
    path = tmp_path / "one.toml"
    text = small_sequence()
    path.write_text(text[: text.index("[[steps]]", text.index("[[steps]]") + 1)])
    with plan_sequence(load_sequence(path), progress=False, store="disk") as plan:
        folder = Path(plan.spool.name)
        assert plan.holograms[0].spooled and any(folder.glob("*.npy"))
        sp = plan.holograms[0]
        # the large arrays come back memory-mapped from their .npy files
        assert isinstance(sp.hologram.phase_rad, np.memmap)
        assert isinstance(sp.prediction.irradiance_mw_per_mm2, np.memmap)
        assert sp.hologram.phase_rad.shape == plan.spec.system.slm.shape
    assert not folder.exists()
    plan.close()  # closing twice is harmless


def test_an_irradiance_target_on_no_on_pixel_is_a_clear_error():
    # common practice: a target irradiance "on the ON pixels" needs an ON pixel; the
    # message names the step's key, not a crash deep inside
    from stimplan.errors import ConfigError
    from stimplan.sequence import parse_sequence

    text = small_sequence().replace('kind = "grating"\nbar_width_px = 2', 'kind = "spot"', 1)
    text = text.replace("[stimuli.spot]", "diameter_um = 5\n\n[stimuli.spot]", 1)
    # an image-domain hologram: the 5 µm spot is designed, but turns no pixel ON
    text = text.replace("iterations = 30", "iterations = 30\nimplant_aware = false", 1)
    with pytest.raises(ConfigError) as err:
        plan_sequence(parse_sequence(text), progress=False)
    assert err.value.field == "steps[0].irradiance_mw_per_mm2"
    assert "ON" in err.value.allowed


def test_an_export_predicted_again_gives_the_planned_retina(plan, tmp_path):
    # common practice (a round trip): the grey levels written, read back through the
    # SLM's grey-level map and propagated again, give the retina the plan predicted
    from stimplan.present.replay import replay_export

    out = export_plan(plan, tmp_path / "exported")
    replay = replay_export(load_export(out))
    assert len(replay.predictions) == len(plan.holograms)
    for pred, sp in zip(replay.predictions, plan.holograms, strict=True):
        ref = sp.prediction.irradiance_mw_per_mm2
        np.testing.assert_allclose(
            pred.irradiance_mw_per_mm2, ref, rtol=2e-3, atol=1e-4 * float(ref.max())
        )
    lit = [f for f in plan.frames if f.lit]
    assert [k for k in replay.frame_pages if k >= 0] == [f.hologram_index for f in lit]
    scales = [s for s in replay.frame_scale if s > 0]
    assert scales == pytest.approx([f.power_mw for f in lit], rel=1e-5)


def test_an_implant_aware_stimulus_that_turns_no_pixel_on_names_its_key():
    # common practice: the error names the file's key of the stimulus and the way out
    from stimplan.errors import ConfigError
    from stimplan.sequence import parse_sequence

    text = small_sequence().replace('kind = "grating"\nbar_width_px = 2', 'kind = "spot"', 1)
    text = text.replace("[stimuli.spot]", "diameter_um = 5\n\n[stimuli.spot]", 1)
    with pytest.raises(ConfigError) as err:
        plan_sequence(parse_sequence(text), progress=False)
    assert err.value.field == "stimuli.bars"
    assert "implant_aware = false" in str(err.value)

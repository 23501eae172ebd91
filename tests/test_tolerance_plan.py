"""The [tolerance] section of a sequence: check --json, the table, the robust design."""

from __future__ import annotations

import json

import numpy as np
import pytest

from stimplan.cli import main
from stimplan.errors import StimplanError
from stimplan.plan import plan_sequence
from stimplan.sequence import load_sequence

from .scenarios import gui_sequence

TOLERANCE = """
[tolerance]
defocus_d = 3.0
shift_um = 10.0
"""


@pytest.fixture
def with_tolerance(tmp_path):
    p = tmp_path / "tol.toml"
    p.write_text(gui_sequence(power=0.5, limits=TOLERANCE))
    return p


def test_check_reports_the_worst_pixels_over_the_ranges(with_tolerance, capsys):
    assert main(["check", str(with_tolerance), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    entries = [r["tolerance"] for r in data["stimuli"] if r["tolerance"] is not None]
    assert entries
    for t in entries:
        # 3 spherical errors (-3, 0, +3 D) x (no shift + 8 directions)
        assert t["cases"] == 3 * 9
        assert t["ranges"]["defocus_d"] == [-3.0, 3.0]
        n, w = t["nominal"], t["worst_on"]
        # common practice: the worst case over a set that holds the nominal one is no better
        assert w["on_min_uw"] <= n["on_min_uw"]
        assert 0 < t["on_retained"] <= 1
        assert t["worst_off"]["off_max_uw"] >= n["off_max_uw"]
        assert n["defocus_d"] == 0 and n["shift_x_um"] == 0
    assert main(["check", str(with_tolerance)]) == 0
    text = capsys.readouterr().out
    assert "tolerance, " in text and "worst ON pixel" in text and "in focus" in text


def test_the_nominal_case_is_the_plans_own_readout(with_tolerance):
    # common practice: the tolerance's in-focus, as-placed case predicts the same retina
    # as the plan does
    spec = load_sequence(with_tolerance)
    from stimplan.plan.evaluate import stimulus_tolerances

    with plan_sequence(spec, progress=False) as plan:
        tol = stimulus_tolerances(plan)
        for sp in plan.holograms:
            if sp.hologram_index not in tol:
                continue
            own = np.asarray(sp.readout.power_uw)[sp.on].min()
            assert tol[sp.hologram_index].nominal.on_min_uw == pytest.approx(own, rel=1e-5)


def test_robust_design_needs_an_implant_aware_hologram(tmp_path):
    text = gui_sequence(power=0.5, limits=TOLERANCE + "robust_design = true\n").replace(
        "implant_aware = true", "implant_aware = false"
    )
    p = tmp_path / "bad.toml"
    p.write_text(text)
    with pytest.raises(StimplanError, match="tolerance.robust_design"):
        load_sequence(p)


def test_a_bad_range_names_its_key_and_line(tmp_path):
    p = tmp_path / "bad.toml"
    p.write_text(gui_sequence(power=0.5, limits="[tolerance]\ndefocus_d = [2.0, 1.0]\n"))
    with pytest.raises(StimplanError, match=r"tolerance\.defocus_d"):
        load_sequence(p)


def test_the_report_shows_the_tolerance(with_tolerance, tmp_path):
    out = tmp_path / "report.html"
    assert main(["report", str(with_tolerance), "-o", str(out), "--quiet"]) == 0
    html = out.read_text()
    assert "tolerance (worst pixels over the ranges)" in html
    assert "worst ON pixel" in html


def test_robust_design_aims_at_smaller_cores(tmp_path):
    # common practice: aiming at the photodiodes' cores lights fewer samples than aiming
    # at the whole photodiodes (the same ON pixels)
    lit = {}
    for robust in (False, True):
        p = tmp_path / f"r{robust}.toml"
        extra = TOLERANCE + f"robust_design = {str(robust).lower()}\n"
        p.write_text(gui_sequence(power=0.5, limits=extra))
        with plan_sequence(load_sequence(p), progress=False) as plan:
            sp = plan.holograms[0]
            lit[robust] = (float(sp.target.intensity.sum()), sp.on.copy())
    assert lit[True][0] < lit[False][0]
    np.testing.assert_array_equal(lit[True][1], lit[False][1])

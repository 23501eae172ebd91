"""The strength–duration threshold and the implant's view at the step's pulse width."""

from __future__ import annotations

import html
import math
from types import SimpleNamespace

import numpy as np
import pytest
from scipy.optimize import curve_fit

from stimplan.errors import ConfigError
from stimplan.implant import (
    Implant,
    PixelReadout,
    StrengthDuration,
    implant_preset,
    implant_view,
    lapicque_threshold,
    stimulation_threshold,
    weiss_threshold,
)
from stimplan.plan import plan_sequence
from stimplan.present.summary import plan_summary, view_text
from stimplan.sequence import SequenceError, parse_sequence

from .scenarios import gui_sequence, small_sequence


def test_weiss_law_closed_forms_and_its_linear_charge():
    # Source: Weiss, Arch. Ital. Biol. 35, 413 (1901): I_th(t) = I_rh (1 + t_ch / t), so
    # the threshold charge I_th t = I_rh t + I_rh t_ch is linear in t. At t = t_ch the
    # threshold is 2 I_rh (the definition of chronaxie); 3 I_rh at t_ch / 2, 1.5 I_rh at
    # 2 t_ch. The straight line through the charges (numpy.polyfit) has slope I_rh and
    # intercept I_rh t_ch.
    rh, ch = 0.3, 1.5
    assert weiss_threshold(ch, rheobase=rh, chronaxie_ms=ch) == pytest.approx(2 * rh)
    assert weiss_threshold(ch / 2, rheobase=rh, chronaxie_ms=ch) == pytest.approx(3 * rh)
    assert weiss_threshold(2 * ch, rheobase=rh, chronaxie_ms=ch) == pytest.approx(1.5 * rh)
    t = np.array([0.2, 0.5, 1.0, 2.0, 4.0, 10.0])
    slope, intercept = np.polyfit(t, weiss_threshold(t, rheobase=rh, chronaxie_ms=ch) * t, 1)
    assert slope == pytest.approx(rh, rel=1e-9) and intercept == pytest.approx(rh * ch, rel=1e-9)
    # published trend: the threshold falls with the pulse width towards the rheobase
    th = weiss_threshold(t, rheobase=rh, chronaxie_ms=ch)
    assert np.all(np.diff(th) < 0) and th[-1] > rh
    assert weiss_threshold(1e6, rheobase=rh, chronaxie_ms=ch) == pytest.approx(rh, rel=1e-5)


def test_lapicque_law_closed_forms():
    # Source: Lapicque, J. Physiol. Pathol. Gén. 9, 620 (1907): I_th = I_rh / (1 -
    # exp(-t / τ)), chronaxie t_ch = τ ln 2 (Geddes, IEEE Trans. Biomed. Eng. 51, 176
    # (2004)). At t_ch: 2 I_rh; at t_ch / 2: 1 / (1 - 2^-1/2) I_rh; at 2 t_ch: 4/3 I_rh.
    rh, ch = 0.3, 1.5
    tau = ch / math.log(2.0)
    assert lapicque_threshold(ch, rheobase=rh, chronaxie_ms=ch) == pytest.approx(2 * rh)
    assert lapicque_threshold(ch / 2, rheobase=rh, chronaxie_ms=ch) == pytest.approx(
        rh / (1 - 2**-0.5)
    )
    assert lapicque_threshold(2 * ch, rheobase=rh, chronaxie_ms=ch) == pytest.approx(rh * 4 / 3)
    t = np.geomspace(0.05, 50.0, 9)
    np.testing.assert_allclose(
        lapicque_threshold(t, rheobase=rh, chronaxie_ms=ch), rh / (1 - np.exp(-t / tau))
    )


def test_a_fit_of_thresholds_at_several_pulse_widths_gives_the_curve_back():
    # Source: scipy.optimize.curve_fit of Weiss's law (Weiss 1901), written here, to
    # thresholds at five pulse widths made from rheobase 0.12 mW/mm² and chronaxie 2.5 ms
    # by hand (I_rh (1 + t_ch / t)): the fitted parameters give the curve back, and the
    # StrengthDuration built from them reads the same thresholds. These are made-up
    # points: no publication we could read gives photovoltaic thresholds at several
    # pulse widths.
    t = np.array([0.5, 1.0, 2.0, 4.0, 10.0])
    points = 0.12 * (1.0 + 2.5 / t)

    def weiss(tt, rh, ch):
        return rh * (1.0 + ch / tt)

    (rh, ch), _ = curve_fit(weiss, t, points, p0=(0.1, 1.0))
    assert rh == pytest.approx(0.12, rel=1e-6) and ch == pytest.approx(2.5, rel=1e-6)
    curve = StrengthDuration(rheobase_mw_per_mm2=rh, chronaxie_ms=ch)
    got = [curve.threshold_mw_per_mm2(x) for x in t]
    np.testing.assert_allclose(got, points, rtol=1e-6)


def test_a_curve_is_not_read_outside_its_pulse_widths():
    # Source: the project brief's safety rule (an unsupported regime is refused, with a
    # clear error): no extrapolation beyond the measured pulse widths
    curve = StrengthDuration(rheobase_mw_per_mm2=0.1, chronaxie_ms=1.0, pulse_range_ms=[1, 10])
    assert curve.pulse_range_ms == (1.0, 10.0)
    assert curve.threshold_mw_per_mm2(10.0) == pytest.approx(0.11)
    for bad in (0.5, 20.0):
        with pytest.raises(ConfigError) as info:
            curve.threshold_mw_per_mm2(bad)
        assert info.value.field == "pulse_ms" and "threshold_pulse_range_ms" in str(info.value)


def test_the_implant_takes_a_curve_or_a_range_never_both():
    # common practice: a strength–duration curve replaces the range; each key is
    # checked with its name, the value and what is allowed
    imp = implant_preset(
        "rat_55um", rings=1, threshold_rheobase_mw_per_mm2=0.1, threshold_chronaxie_ms=2.0
    )
    assert imp.threshold_mw_per_mm2 is None and imp.threshold_source is None
    t = stimulation_threshold(imp, pulse_ms=2.0)
    assert (t.low_mw_per_mm2, t.high_mw_per_mm2) == pytest.approx((0.2, 0.2))
    assert t.pulse_ms == 2.0 and t.model == "weiss" and "Weiss law" in t.source
    with pytest.raises(ConfigError) as info:
        stimulation_threshold(imp)  # a curve needs the pulse width
    assert info.value.field == "pulse_ms"
    base = dict(pitch_um=55.0, rings=1, active_fraction=0.6)
    cases = [
        (dict(threshold_mw_per_mm2=[0.1, 1.0], threshold_rheobase_mw_per_mm2=0.1,
              threshold_chronaxie_ms=1.0), "implant.threshold_mw_per_mm2"),
        (dict(threshold_rheobase_mw_per_mm2=0.1), "implant.threshold_chronaxie_ms"),
        (dict(threshold_chronaxie_ms=1.0), "implant.threshold_chronaxie_ms"),
        (dict(threshold_rheobase_mw_per_mm2=0.1, threshold_chronaxie_ms=1.0,
              threshold_law="hill"), "implant.threshold_law"),
        (dict(threshold_rheobase_mw_per_mm2=0.1, threshold_chronaxie_ms=1e4),
         "implant.threshold_chronaxie_ms"),
        (dict(threshold_rheobase_mw_per_mm2=0.0, threshold_chronaxie_ms=1.0),
         "implant.threshold_rheobase_mw_per_mm2"),
        (dict(threshold_rheobase_mw_per_mm2=0.1, threshold_chronaxie_ms=1.0,
              threshold_pulse_range_ms=[10, 1]), "implant.threshold_pulse_range_ms"),
    ]  # fmt: skip
    for kw, field in cases:
        with pytest.raises(ConfigError) as info:
            Implant(**base, **kw)
        assert info.value.field == field, kw
    # a curve's own source rides with it
    own = Implant(
        **base,
        threshold_rheobase_mw_per_mm2=0.1,
        threshold_chronaxie_ms=1.0,
        threshold_law="lapicque",
        threshold_source="our retinas",
    )
    t = stimulation_threshold(own, pulse_ms=1.0)
    assert t.low_mw_per_mm2 == pytest.approx(0.2) and "our retinas" in t.source
    assert Implant(**own.to_dict()) == own


def _synthetic_readout(irr):
    n = len(irr)
    z = np.zeros(n)
    power = np.asarray(irr, float) * 1e-3 * 1e3  # 1e-3 mm² photodiodes, µW
    return PixelReadout(
        pixel=np.arange(n),
        center_x_um=z,
        center_y_um=z,
        active_area_mm2=np.full(n, 1e-3),
        power_uw=power,
        mean_irradiance_mw_per_mm2=np.asarray(irr, float),
        min_irradiance_mw_per_mm2=np.asarray(irr, float),
        max_irradiance_mw_per_mm2=np.asarray(irr, float),
        photocurrent_ua=0.5 * power,
        responsivity_a_per_w=0.5,
    )


@pytest.mark.parametrize(
    ("pulse_ms", "threshold", "on_below", "off_above"),
    [
        # Weiss, rheobase 0.2 mW/mm², chronaxie 2 ms: 0.2 (1 + 2 / t), by hand
        (2.0, 0.4, 2, 2),  # ON 0.1, 0.3 under 0.4; OFF 1.2, 0.7 over
        (8.0, 0.25, 1, 2),  # ON 0.1 under 0.25; OFF 1.2, 0.7 over
        (0.5, 1.0, 3, 1),  # ON 0.1, 0.3, 0.6 under 1.0; OFF 1.2 over
    ],
)
def test_the_view_counts_against_a_hand_count(pulse_ms, threshold, on_below, off_above):
    # Source: Weiss's law (Weiss 1901) evaluated by hand; the counts of a six-pixel
    # readout counted by hand (ON pixels 0.1, 0.3, 0.6; OFF pixels 1.2, 0.05, 0.7 mW/mm²)
    ro = _synthetic_readout([0.1, 0.3, 0.6, 1.2, 0.05, 0.7])
    on = np.array([True, True, True, False, False, False])
    imp = Implant(
        pitch_um=55.0,
        rings=1,
        active_fraction=0.6,
        threshold_rheobase_mw_per_mm2=0.2,
        threshold_chronaxie_ms=2.0,
    )
    t = stimulation_threshold(imp, pulse_ms=pulse_ms)
    assert t.low_mw_per_mm2 == pytest.approx(threshold)
    d = implant_view(ro, on, threshold=t).as_dict()
    assert (d["on_below"], d["off_above"]) == (on_below, off_above)
    assert d["pulse_ms"] == pulse_ms and d["threshold_model"] == "weiss"
    # the photocurrent of the dimmest ON pixel: 0.5 A/W × 0.1 mW/mm² × 1e-3 mm² = 0.05 µA
    assert d["photocurrent_ua"]["on_min"] == pytest.approx(0.05)
    assert d["photocurrent_ua"]["off_max"] == pytest.approx(0.6)
    # the range keeps its reading: [0.2, 0.65] -> ON under 0.65: 3; OFF over 0.2: 2
    r = stimulation_threshold(
        implant_preset("rat_55um", rings=1, threshold_mw_per_mm2=[0.2, 0.65]), pulse_ms=pulse_ms
    )
    d = implant_view(ro, on, threshold=r).as_dict()
    assert (d["on_below"], d["off_above"]) == (3, 2) and d["threshold_model"] == "range"


def test_the_plugin_reads_the_curve_at_the_panel_pulse_width():
    # Source: Weiss's law by hand: 0.2 (1 + 2 / 5) = 0.28 mW/mm² at the panel's 5 ms pulses;
    # counted by hand: ON 0.1 under it, OFF 1.2 and 0.7 over it
    from stimplan_napari._layers import result_view

    imp = Implant(
        pitch_um=55.0,
        rings=1,
        active_fraction=0.6,
        threshold_rheobase_mw_per_mm2=0.2,
        threshold_chronaxie_ms=2.0,
    )
    ro = _synthetic_readout([0.1, 0.3, 0.6, 1.2, 0.05, 0.7, 0.2])
    on = np.array([True, True, True, False, False, False, False])
    result = SimpleNamespace(
        implant=imp, readout=ro, on=on, power_mw=1.0, request=SimpleNamespace(pulse_ms=5.0)
    )
    view = result_view(result)
    assert view.threshold.low_mw_per_mm2 == pytest.approx(0.28)
    assert int(view.on_below.sum()) == 1 and int(view.off_above.sum()) == 2


def test_the_sequence_file_takes_a_curve():
    # common practice: the curve's keys ride in [implant] and are checked by key
    text = gui_sequence(1.0).replace(
        'preset = "rat_55um"',
        'preset = "rat_55um"\nthreshold_rheobase_mw_per_mm2 = 0.1\nthreshold_chronaxie_ms = 2\n'
        'threshold_law = "lapicque"\nthreshold_pulse_range_ms = [1, 20]',
        1,
    )
    spec = parse_sequence(text)
    assert spec.implant.strength_duration.law == "lapicque"
    assert spec.implant.threshold_pulse_range_ms == (1.0, 20.0)
    with pytest.raises(SequenceError) as info:
        parse_sequence(text.replace("[1, 20]", "[1, 1e9]"))
    assert [e.field for e in info.value.errors] == ["implant.threshold_pulse_range_ms[1]"]


def test_the_plan_reads_the_curve_at_each_stimulus_pulse_width():
    # Source: Weiss's law by hand, rheobase 0.5 mW/mm², chronaxie 1 ms: the spot's 5 ms
    # pulses give 0.5 (1 + 1/5) = 0.6 mW/mm²; the grating's 10 ms pulses lie outside the
    # curve's [1, 8] ms and its view is refused, naming the key. The counts are made by
    # hand from the readout at the spot's laser power.
    text = small_sequence().replace(
        'preset = "rat_55um"',
        'preset = "rat_55um"\nthreshold_rheobase_mw_per_mm2 = 0.5\nthreshold_chronaxie_ms = 1\n'
        "threshold_pulse_range_ms = [1, 8]",
        1,
    )
    plan = plan_sequence(parse_sequence(text), progress=False)
    rows = {r["name"]: r for r in plan_summary(plan)["stimuli"]}
    bars = rows["bars"]["implant_view"]
    assert bars["threshold_mw_per_mm2"] is None and "threshold_pulse_range_ms" in bars["refused"]
    spot = rows["spot"]["implant_view"]
    assert spot["threshold_mw_per_mm2"] == pytest.approx([0.6, 0.6]) and spot["pulse_ms"] == 5.0
    sp = plan.stimuli["spot"]
    irr = np.asarray(sp.readout.mean_irradiance_mw_per_mm2) * 1.5  # 1.5 mW, 1 mW maps
    on = np.asarray(sp.on)
    assert spot["on_below"] == int(np.sum(on & (irr < 0.6)))
    assert spot["off_above"] == int(np.sum(~on & (irr > 0.6)))
    assert "the curve at 5 ms pulses" in view_text(spot)
    # the report says the same, with the cautions (every exposure figure carries them)
    from stimplan.cautions import CAUTIONS
    from stimplan.present.report import render_report

    html_text = render_report(plan)
    assert "the curve at 5 ms pulses" in html_text and "threshold_pulse_range_ms" in html_text
    assert html.escape(CAUTIONS) in html_text

"""The stimulus library, checked against standards and closed-form results."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.fft
from PIL import Image

from stimplan.errors import ConfigError, InputFileError
from stimplan.grid import RetinalGrid
from stimplan.implant import Implant
from stimplan.optics.eye import eye_preset
from stimplan.stimuli import (
    LANDOLT_ORIENTATIONS,
    SLOAN_LETTERS,
    Annulus,
    Bar,
    Blank,
    Checkerboard,
    Flash,
    Grating,
    ImageStimulus,
    LandoltRing,
    SloanLetter,
    Spot,
    TumblingE,
    compose,
    from_dict,
    stimulus_from_dict,
    stimulus_kinds,
)

HUMAN = eye_preset("human")


def _cut_length(profile: np.ndarray, pitch: float) -> float:
    """Lit length along a cut: sum of coverage × sample pitch."""
    return float(np.sum(profile, dtype=np.float64)) * pitch


# -- Landolt ring (ISO 8596) ------------------------------------------------------------


def test_landolt_proportions():
    # Source: ISO 8596: outer diameter 5 units, stroke 1 unit, gap 1 unit (= D/5).
    d = 100.0
    grid = RetinalGrid((400, 400), 0.5, 0.5)
    img = LandoltRing(height_um=d, orientation="right").render(grid)
    r0, c0 = grid.centre_index
    col = img[:, c0]  # vertical cut through the centre, away from the gap
    upper = col[:r0]
    lower = col[r0:]
    assert _cut_length(upper, 0.5) == pytest.approx(d / 5, abs=0.1)  # stroke
    assert _cut_length(lower, 0.5) == pytest.approx(d / 5, abs=0.1)
    y = grid.y_um
    inner = np.abs(y) < 0.35 * d
    assert _cut_length(1.0 - col[inner], 0.5) == pytest.approx(3 * d / 5, abs=0.1)  # hole
    lit = np.nonzero(col > 0.5)[0]
    assert (lit.max() - lit.min() + 1) * 0.5 == pytest.approx(d, abs=0.5)  # outer diameter
    # gap: the vertical cut through the middle of the right-hand stroke (x = 2 units)
    c_gap = int(round(grid.index_of(0.4 * d, 0.0)[1]))
    band = np.abs(y) < 0.25 * d
    assert _cut_length(1.0 - img[band, c_gap], 0.5) == pytest.approx(d / 5, abs=0.1)


@pytest.mark.parametrize("name", list(LANDOLT_ORIENTATIONS))
def test_landolt_gap_direction(name):
    # Source: ISO 8596: eight gap orientations at 45° steps.
    d = 60.0
    grid = RetinalGrid((160, 160), 0.5, 0.5)
    img = LandoltRing(height_um=d, orientation=name, center_x_um=3.0).render(grid)
    ang = np.deg2rad(np.arange(0, 360, 1.0))
    r = 0.4 * d  # middle of the stroke
    rows, cols = grid.index_of(3.0 + r * np.cos(ang), r * np.sin(ang))
    vals = img[np.round(rows).astype(int), np.round(cols).astype(int)]
    dark = 1.0 - vals
    gap = math.degrees(math.atan2(np.sum(dark * np.sin(ang)), np.sum(dark * np.cos(ang))))
    expected = LANDOLT_ORIENTATIONS[name]
    assert (gap - expected + 180) % 360 - 180 == pytest.approx(0.0, abs=1.0)
    # the ring is closed elsewhere: all but the gap sector is lit
    assert np.mean(vals > 0.5) == pytest.approx(
        1 - 2 * math.degrees(math.asin(0.5 / 2)) / 360, abs=0.02
    )


def test_landolt_sized_by_acuity_units():
    # Source: Bailey & Lovie 1976 (logMAR 1 = 20/200 = decimal 0.1 = MAR 10 arcmin) and
    # Drasdo & Fowler 1974 (288 µm/deg): the symbol is 5 MAR = 50 arcmin = 240 µm high.
    expected = 5 * 10.0 / 60.0 * 288.0
    for ring in (
        LandoltRing.from_logmar(1.0, HUMAN),
        LandoltRing.from_snellen("20/200", HUMAN),
        LandoltRing.from_decimal(0.1, HUMAN),
        LandoltRing.from_mar_arcmin(10.0, HUMAN),
        stimulus_from_dict("landolt", {"snellen": "6/60"}, eye=HUMAN),
    ):
        assert ring.height_um == pytest.approx(expected)
        assert ring.logmar(HUMAN) == pytest.approx(1.0)


# -- Sloan letters and tumbling E ---------------------------------------------------------


@pytest.mark.parametrize("letter", SLOAN_LETTERS)
def test_sloan_letter_height_equals_width(letter):
    # Source: NAS-NRC Committee on Vision, Adv. Ophthalmol. 41, 103 (1980); Sloan 1959:
    # letters on a 5×5 grid, height = width.
    h = 50.0
    grid = RetinalGrid((128, 128), 0.5, 0.5)
    img = SloanLetter(letter=letter, height_um=h).render(grid)
    rows = np.nonzero(img.max(axis=1) > 0.5)[0]
    cols = np.nonzero(img.max(axis=0) > 0.5)[0]
    height = (rows.max() - rows.min() + 1) * 0.5
    width = (cols.max() - cols.min() + 1) * 0.5
    assert height == pytest.approx(h, abs=1.0)
    assert width == pytest.approx(h, abs=1.0)
    assert img.sum() * 0.25 < 0.75 * h * h  # a letter, not a filled square


@pytest.mark.parametrize(
    "letter,y_units,strokes",
    [("H", 1.0, 2), ("H", 4.0, 2), ("O", 2.5, 2), ("D", 2.5, 2), ("C", 2.5, 1)],
)
def test_sloan_stroke_is_one_fifth(letter, y_units, strokes):
    # Source: NAS-NRC Committee on Vision 1980: stroke = 1/5 of the letter height; a
    # horizontal cut through vertical strokes crosses `strokes` strokes of 1 unit each.
    h = 50.0
    unit = h / 5
    grid = RetinalGrid((256, 256), 0.25, 0.25)
    img = SloanLetter(letter=letter, height_um=h).render(grid)
    row = int(round(grid.index_of(0.0, (y_units - 2.5) * unit)[0]))
    assert _cut_length(img[row], 0.25) == pytest.approx(strokes * unit, abs=0.2)


def test_tumbling_e_bars_and_orientations():
    # Source: ISO 8596-style E: 5×5 units, three bars and a spine of 1 unit.
    h = 50.0
    unit = h / 5
    grid = RetinalGrid((256, 256), 0.25, 0.25)
    img = TumblingE(height_um=h).render(grid)
    col = int(round(grid.index_of(0.5 * unit, 0.0)[1]))  # through the bars, right of the spine
    assert _cut_length(img[:, col], 0.25) == pytest.approx(3 * unit, abs=0.2)
    row = int(round(grid.index_of(0.0, 1.0 * unit)[0]))  # between top and middle bars
    assert _cut_length(img[row], 0.25) == pytest.approx(unit, abs=0.2)
    # rotating by orientation equals rotating the stimulus by the same angle
    up = TumblingE(height_um=h, orientation="up").render(grid)
    turned = TumblingE(height_um=h, rotation_deg=90.0).render(grid)
    assert np.abs(up - turned).max() < 0.05
    assert np.abs(up - img).max() > 0.9
    # an E pointing up has its open side up: the top row band is not fully lit
    top = int(round(grid.index_of(0.0, 2.0 * unit)[0]))
    assert _cut_length(up[top], 0.25) == pytest.approx(3 * unit, abs=0.2)


def test_letter_outside_the_set():
    # Source: the ten Sloan letters C D H K N O R S V Z (Sloan 1959).
    with pytest.raises(ConfigError) as err:
        SloanLetter(letter="A", height_um=50.0)
    assert err.value.field == "letter.letter"
    assert "C D H K N O R S V Z" in str(err.value)
    with pytest.raises(ConfigError):
        stimulus_from_dict("letter", {"letter": "E", "height_um": 50.0})
    assert SloanLetter(letter="k", height_um=5.0).letter == "K"


# -- gratings -----------------------------------------------------------------------------


def test_sine_grating_fft_peak_at_expected_frequency():
    # Source: definition of spatial frequency, period = um_per_deg / cpd (Drasdo & Fowler
    # 1974 scale); DFT bin k = field width / period.
    cpd = 2.25  # period 128 µm on the human retina
    grid = RetinalGrid((512, 512), 2.0, 2.0)  # 1024 µm field = 8 periods
    g = Grating.from_cycles_per_deg(cpd, HUMAN, waveform="sine")
    assert g.period_um == pytest.approx(128.0)
    img = g.render(grid)
    spec = np.abs(scipy.fft.fft2(img - img.mean(), norm="ortho", workers=-1))
    r, c = np.unravel_index(np.argmax(spec), spec.shape)
    fx = scipy.fft.fftfreq(512, d=2.0)[c]
    fy = scipy.fft.fftfreq(512, d=2.0)[r]
    assert abs(fx) == pytest.approx(1.0 / 128.0)
    assert fy == 0.0
    # Source: Goodman, Introduction to Fourier Optics, §2.1: area sampling is a convolution with
    # the sample rect, which scales the cosine by sinc(pitch / period) (numpy.sinc).
    amp = 2 * spec[r, c] / 512  # cosine amplitude (ortho DFT: peak = A/2 · N)
    assert amp == pytest.approx(0.5 * np.sinc(2.0 / 128.0), rel=1e-4)


def test_rotated_grating_peak_and_y_up_convention():
    # Source: DFT of a plane wave; y up against the row index (grid convention), so a grating
    # rotated by +30° has row and column frequencies of opposite sign.
    grid = RetinalGrid((256, 256), 1.0, 1.0)
    period = 256.0 / 10.0
    img = Grating(period_um=period, waveform="sine", rotation_deg=30.0).render(grid)
    spec = np.abs(scipy.fft.fft2(img - img.mean(), norm="ortho", workers=-1))
    spec[:, 129:] = 0  # keep the half plane with column frequency >= 0
    r, c = np.unravel_index(np.argmax(spec), spec.shape)
    fr = scipy.fft.fftfreq(256)[r] * 256
    fc = scipy.fft.fftfreq(256)[c] * 256
    assert fc == pytest.approx(10 * math.cos(math.radians(30)), abs=1.0)
    assert -fr == pytest.approx(10 * math.sin(math.radians(30)), abs=1.0)


def test_square_grating_duty_cycle_and_contrast():
    # Source: duty cycle = bright fraction of a period; Michelson contrast
    # (Imax - Imin) / (Imax + Imin).
    grid = RetinalGrid((64, 400), 1.0, 1.0)  # 400 µm = 8 periods of 50 µm
    g = Grating(period_um=50.0, duty_cycle=0.3, phase_deg=17.0)
    assert g.render(grid).mean() == pytest.approx(0.3, abs=1e-5)
    gc = Grating(period_um=50.0, contrast=0.4)
    img = gc.render(grid)
    hi, lo = float(img.max()), float(img.min())
    assert (hi - lo) / (hi + lo) == pytest.approx(0.4, abs=1e-5)
    assert hi == pytest.approx(1.0)


def test_grating_sizes_in_pixels_and_degrees():
    # Source: bar width = half period; Lorach et al. 2015 (bar width in pixels via the pitch).
    g = Grating.from_bar_width_px(2.0, 55.0)
    assert g.period_um == pytest.approx(220.0)
    assert stimulus_from_dict("grating", {"bar_width_px": 1.0}, pitch_um=70.0).period_um == 140.0
    assert stimulus_from_dict("grating", {"period_deg": 0.5}, eye=HUMAN).period_um == 144.0
    assert stimulus_from_dict("grating", {"cycles_per_deg": 1.0}, eye=HUMAN).period_um == 288.0
    with pytest.raises(ConfigError) as err:
        stimulus_from_dict("grating", {"cycles_per_deg": 1.0})
    assert "eye" in str(err.value)
    with pytest.raises(ConfigError):
        stimulus_from_dict("grating", {"period_um": 10.0, "cycles_per_deg": 1.0}, eye=HUMAN)
    with pytest.raises(ConfigError) as err:
        Grating(period_um=0.0)
    assert err.value.field == "grating.period_um"
    with pytest.raises(ConfigError):
        Grating(period_um=10.0, duty_cycle=1.0)


# -- checkerboards ----------------------------------------------------------------------


def test_checkerboard_and_reversal():
    # Source: Odom et al., Doc. Ophthalmol. 133, 1 (2016): pattern reversal swaps the checks;
    # a 1° check is 288 µm on the human retina (Drasdo & Fowler 1974).
    assert Checkerboard.from_check_deg(1.0, HUMAN).check_um == pytest.approx(288.0)
    assert stimulus_from_dict("checkerboard", {"check_deg": 0.25}, eye=HUMAN).check_um == 72.0
    grid = RetinalGrid((64, 64), 1.0, 1.0)
    cb = Checkerboard(check_um=8.0, center_x_um=-0.5, center_y_um=0.5)  # edges on sample edges
    img = cb.render(grid)
    assert set(np.unique(img)) == {0.0, 1.0}
    assert img.mean() == pytest.approx(0.5)
    assert np.array_equal(img + cb.reversed().render(grid), np.ones_like(img))
    assert cb.reversed().reversed() == cb
    rot = Checkerboard(check_um=8.0, rotation_deg=30.0)
    both = rot.render(grid) + rot.reversed().render(grid)
    assert np.allclose(both, 1.0, atol=1e-6)


# -- anti-aliasing -------------------------------------------------------------------------


def test_bar_edge_through_sample_centre_gives_half():
    # common practice: area sampling gives an edge through the middle of a sample 0.5 there.
    grid = RetinalGrid((32, 32), 1.0, 1.0)
    img = Bar(width_um=10.0, length_um=20.0).render(grid)  # edges at x = ±5 µm
    r, c = grid.centre_index
    assert img[r, c - 5] == pytest.approx(0.5)
    assert img[r, c + 5] == pytest.approx(0.5)
    assert img[r, c] == 1.0 and img[r, c - 6] == 0.0
    quarter = Bar(width_um=10.5, length_um=20.0).render(grid)  # edges 1/4 into a sample
    assert quarter[r, c + 5] == pytest.approx(0.75)
    # the same for a rotated bar through analytic grating-like box averages
    g = Grating(period_um=20.0, duty_cycle=0.5).render(grid)  # edges at x = ±5 µm
    assert g[r, c + 5] == pytest.approx(0.5, abs=1e-6)


def test_spot_area_and_annulus():
    # Source: disc area π d²/4 and annulus area π (D² - d²)/4.
    grid = RetinalGrid((200, 200), 0.5, 0.5)
    spot = Spot(diameter_um=40.0, center_x_um=3.3, center_y_um=-2.1).render(grid)
    assert spot.sum() * 0.25 == pytest.approx(math.pi * 400.0, rel=2e-3)
    ann = Annulus(inner_diameter_um=20.0, outer_diameter_um=60.0).render(grid)
    assert ann.sum() * 0.25 == pytest.approx(math.pi * (900.0 - 100.0), rel=2e-3)
    with pytest.raises(ConfigError) as err:
        Annulus(inner_diameter_um=20.0, outer_diameter_um=10.0)
    assert err.value.field == "annulus.outer_diameter_um"


def test_polarity_flash_blank():
    # common practice
    grid = RetinalGrid((64, 64), 1.0, 1.0)
    dark = Spot(diameter_um=10.0, polarity="dark").render(grid)
    assert dark[0, 0] == 1.0 and dark[32, 32] == 0.0
    assert np.all(Flash(level=0.3).render(grid) == np.float32(0.3))
    assert not Blank().render(grid).any()
    with pytest.raises(ConfigError) as err:
        Spot(diameter_um=10.0, contrast=1.5)
    assert err.value.field == "spot.contrast"


def test_render_1024():
    # common practice: renders are float32 in [0, 1] (speed: benchmarks/geometry_speed.py)
    grid = RetinalGrid((1024, 1024), 1.5, 1.5)
    for stim in (
        Grating(period_um=60.0, rotation_deg=25.0),
        LandoltRing(height_um=600.0, orientation="up_left"),
        SloanLetter(letter="S", height_um=900.0, rotation_deg=5.0),
    ):
        img = stim.render(grid)
        assert img.dtype == np.float32 and img.shape == grid.shape
        assert float(img.min()) >= 0.0 and float(img.max()) <= 1.0


# -- composition, inversion, masking --------------------------------------------------------


def test_composition_is_maximum_without_clipping():
    # common practice: max() composition keeps [0, 1] without clipping.
    grid = RetinalGrid((64, 64), 1.0, 1.0)
    a = Spot(diameter_um=20.0, contrast=1.0)
    b = Spot(diameter_um=20.0, center_x_um=8.0)
    both = compose(a, b).render(grid)
    assert np.array_equal(both, np.maximum(a.render(grid), b.render(grid)))
    assert float(both.max()) == 1.0
    inv = a.inverted().render(grid)
    assert np.allclose(inv, 1.0 - a.render(grid))


def test_masking_to_implant():
    # common practice: zero outside the photodiodes, coverage-weighted on their edges.
    imp = Implant(pitch_um=20.0, rings=2, active_fraction=0.5)
    grid = RetinalGrid((128, 128), 1.0, 1.0)
    masked = Flash().masked(imp).render(grid)
    cov = imp.rasterize(grid).coverage_image()
    assert np.allclose(masked, cov)
    assert masked.sum() == pytest.approx(imp.n_pixels * imp.active_area_um2, rel=1e-5)
    foot = Flash().masked(imp, region="footprint").render(grid)
    assert foot.sum() == pytest.approx(imp.n_pixels * imp.cell_area_um2, rel=1e-5)
    with pytest.raises(ConfigError):
        Flash().masked(imp, region="outline")


# -- images ----------------------------------------------------------------------------------


def test_image_from_png_scaled_to_um(tmp_path):
    # Source: area-weighted resampling preserves the integral (common practice), and an image
    # pixel of exactly 2×2 samples reproduces its value.
    pix = np.array([[0, 255], [255, 51]], dtype=np.uint8)
    path = tmp_path / "pattern.png"
    Image.fromarray(pix).save(path)
    grid = RetinalGrid((16, 16), 1.0, 1.0)
    stim = ImageStimulus(path=str(path), width_um=4.0, center_x_um=-0.5, center_y_um=0.5)
    img = stim.render(grid)
    r, c = grid.centre_index
    block = img[r - 2 : r + 2, c - 2 : c + 2]
    expected = np.kron(pix / 255.0, np.ones((2, 2)))
    assert np.allclose(block, expected, atol=1e-6)
    off = ImageStimulus(path=str(path), width_um=5.3, center_x_um=0.37, rotation_deg=0.0)
    total = float(off.render(grid).sum())
    assert total == pytest.approx((pix / 255.0).mean() * 5.3 * 5.3, rel=1e-6)
    rotated = ImageStimulus(path=str(path), width_um=8.0, rotation_deg=90.0).render(grid)
    assert float(rotated.sum()) == pytest.approx((pix / 255.0).mean() * 64.0, rel=0.02)
    again = from_dict(stim.to_dict())
    assert again == stim


def test_image_16_bit_tiff(tmp_path):
    # common practice: 16-bit grey values are scaled by 65535.
    import tifffile

    path = tmp_path / "ramp.tif"
    tifffile.imwrite(path, np.full((4, 4), 65535 // 5, dtype=np.uint16))
    stim = ImageStimulus(path=str(path), width_um=10.0)
    assert float(stim.pixels.max()) == pytest.approx(0.2, abs=1e-4)


def test_image_file_errors(tmp_path):
    # common practice: a text file with an image suffix, a too-large image and a wrong suffix
    # raise InputFileError naming the field.
    fake = tmp_path / "notes.png"
    fake.write_text("this is not an image")
    with pytest.raises(InputFileError) as err:
        ImageStimulus(path=str(fake), width_um=10.0)
    assert err.value.field == "image.path"
    big = tmp_path / "big.png"
    Image.fromarray(np.zeros((40, 40), np.uint8)).save(big)
    with pytest.raises(InputFileError) as err:
        ImageStimulus(path=str(big), width_um=10.0, max_pixels=100)
    assert "at most 100 pixels" in str(err.value)
    with pytest.raises(InputFileError):
        ImageStimulus(path=str(tmp_path / "missing.png"), width_um=10.0)
    txt = tmp_path / "pattern.txt"
    txt.write_text("1 2 3")
    with pytest.raises(InputFileError) as err:
        ImageStimulus(path=str(txt), width_um=10.0)
    assert ".png" in str(err.value)


# -- registry ----------------------------------------------------------------------------------


def test_registry_kinds_and_round_trip():
    # common practice
    kinds = set(stimulus_kinds())
    assert {
        "grating",
        "checkerboard",
        "landolt",
        "tumbling_e",
        "letter",
        "spot",
        "bar",
        "annulus",
        "flash",
        "blank",
        "image",
    } <= kinds
    with pytest.raises(ConfigError) as err:
        stimulus_from_dict("hologram", {})
    assert err.value.field == "stimulus.kind" and "landolt" in str(err.value)
    items = [
        Grating(period_um=30.0, waveform="sine", rotation_deg=10.0),
        Checkerboard(check_um=12.0, reversal=True),
        LandoltRing(height_um=40.0, orientation="down_left"),
        TumblingE(height_um=40.0, orientation="left", polarity="dark"),
        SloanLetter(letter="Z", height_um=40.0),
        Spot(diameter_um=5.0, center_x_um=2.0),
        Bar(width_um=3.0, length_um=9.0, rotation_deg=45.0),
        Annulus(inner_diameter_um=3.0, outer_diameter_um=9.0),
        Flash(level=0.5),
        Blank(),
        compose(Spot(diameter_um=5.0), Bar(width_um=1.0, length_um=4.0)).inverted(),
    ]
    for stim in items:
        d = stim.to_dict()
        assert d["kind"] == stim.kind
        assert from_dict(d) == stim
    masked = Spot(diameter_um=5.0).masked(Implant(pitch_um=20.0, rings=1, active_fraction=0.5))
    assert from_dict(masked.to_dict()) == masked


def test_registry_parameter_errors():
    # common practice
    with pytest.raises(ConfigError) as err:
        stimulus_from_dict("spot", {"diameter_um": 5.0, "radius_um": 2.0})
    assert err.value.field == "spot.radius_um"
    with pytest.raises(ConfigError) as err:
        stimulus_from_dict("spot", {"diameter_deg": 1.0})
    assert "eye" in str(err.value)
    spot = stimulus_from_dict("spot", {"diameter_deg": 1.0, "center_x_deg": 2.0}, eye=HUMAN)
    assert spot.diameter_um == 288.0 and spot.center_x_um == 576.0
    with pytest.raises(ConfigError):
        stimulus_from_dict("landolt", {"logmar": 1.0, "height_um": 5.0}, eye=HUMAN)
    with pytest.raises(ConfigError) as err:
        stimulus_from_dict("landolt", {"height_um": 5.0, "orientation": "north"})
    assert err.value.field == "landolt.orientation"

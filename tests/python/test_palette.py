"""The plot palette (solver-check/src/plot/palette.rs) is what its recipe
says, and its colours stay apart for people with normal and with deficient
colour vision.

References (colour-science, pinned in tests/requirements.txt, does the
arithmetic; the project's Rust code is not used):
- OKLab / OKLCH: B. Ottosson, "A perceptual color space for image
  processing", 2020 (colour.Oklab_to_XYZ).
- sRGB: IEC 61966-2-1:1999 (primaries, D65 white, the transfer function).
- CIEDE2000: G. Sharma, W. Wu, E. N. Dalal, "The CIEDE2000 color-difference
  formula: implementation notes, supplementary test data, and mathematical
  observations", Color Research & Application 30(1), 2005
  (colour.delta_E(method="CIE 2000")); checked here against their Table 1.
- Colour-vision deficiency: G. M. Machado, M. M. Oliveira, L. A. F.
  Fernandes, "A physiologically-based model for simulation of color vision
  deficiency", IEEE TVCG 15(6), 2009: their matrices at severity 1.0
  (protanopia, deuteranopia, tritanopia), applied to linear sRGB
  (colour.blindness.matrix_cvd_Machado2009).
"""
import itertools
import re
import warnings

import numpy as np
import pytest

from conftest import ROOT

with warnings.catch_warnings():
    # colour-science warns that matplotlib (for its plots) is missing.
    warnings.simplefilter("ignore")
    import colour

PLOT = ROOT / "solver-check" / "src" / "plot"
SRGB = colour.RGB_COLOURSPACES["sRGB"]

# The recipe, as palette.rs and DEVELOPERS.md state it.
HUES = [45.0 * k for k in range(8)]
CHROMA = 0.115
LIGHTNESS = [0.45, 0.79, 0.62]

# Thresholds: CIEDE2000 of about 1 is a just-noticeable difference; sets of
# category colours are commonly asked to keep 10 or more apart (common
# practice, no source). The palette reaches 26.8 for normal vision and 10.9
# at worst (tritanopia) under the simulated dichromacies; the test asks a
# little less.
MIN_NORMAL = 25.0
MIN_CVD = 10.0


def hexes(text):
    return re.findall(r'"(#[0-9a-fA-F]{6})"', text)


def palette():
    src = (PLOT / "palette.rs").read_text()
    block = re.search(r"pub const PALETTE: \[&str; 8\] = \[(.*?)\];", src, re.S).group(1)
    return hexes(block)


def to_linear(h):
    rgb = np.array([int(h[i:i + 2], 16) for i in (1, 3, 5)]) / 255.0
    return colour.cctf_decoding(rgb, function="sRGB")


def lab(linear):
    xyz = colour.RGB_to_XYZ(np.clip(linear, 0, 1), SRGB, apply_cctf_decoding=False)
    return colour.XYZ_to_Lab(xyz, SRGB.whitepoint)


def min_difference(labs):
    return min(float(colour.delta_E(a, b, method="CIE 2000")) for a, b in itertools.combinations(labs, 2))


def test_ciede2000_reproduces_the_published_test_data():
    # Sharma, Wu & Dalal (2005), Table 1, pairs 1, 7 and 17: L*a*b* pairs and
    # ΔE00 (the table's values, from memory; colour-science reproduces them).
    pairs = [
        ((50.0, 2.6772, -79.7751), (50.0, 0.0, -82.7485), 2.0425),
        ((50.0, 0.0, 0.0), (50.0, -1.0, 2.0), 2.3669),
        ((50.0, 2.5, 0.0), (73.0, 25.0, -18.0), 27.1492),
    ]
    for a, b, want in pairs:
        assert float(colour.delta_E(np.array(a), np.array(b), method="CIE 2000")) == pytest.approx(want, abs=1e-4)


def test_the_palette_is_its_recipe():
    got = palette()
    assert len(got) == 8
    for k, h in enumerate(got):
        c, hue = CHROMA, np.radians(HUES[k])
        oklab = np.array([LIGHTNESS[k % 3], c * np.cos(hue), c * np.sin(hue)])
        linear = colour.XYZ_to_RGB(colour.Oklab_to_XYZ(oklab), SRGB, apply_cctf_encoding=False)
        assert linear.min() > -1e-6 and linear.max() < 1 + 1e-6, f"colour {k} lies outside sRGB"
        want = np.round(colour.cctf_encoding(np.clip(linear, 0, 1), function="sRGB") * 255).astype(int)
        assert [int(h[i:i + 2], 16) for i in (1, 3, 5)] == list(want), (k, h, want)


def test_colours_stay_apart_for_normal_vision():
    d = min_difference([lab(to_linear(h)) for h in palette()])
    assert d >= MIN_NORMAL, d


@pytest.mark.parametrize("deficiency", ["Protanomaly", "Deuteranomaly", "Tritanomaly"])
def test_colours_stay_apart_under_simulated_dichromacy(deficiency):
    with warnings.catch_warnings():
        # colour-science notes that the tritanomaly matrices follow the
        # paper's shift approximation; that is the model named above.
        warnings.simplefilter("ignore")
        m = colour.blindness.matrix_cvd_Machado2009(deficiency, 1.0)
    d = min_difference([lab(m @ to_linear(h)) for h in palette()])
    assert d >= MIN_CVD, (deficiency, d)


def test_a_single_lightness_would_not_do():
    # Why three lightness levels: the same eight hues at one lightness
    # (the middle one) collapse in pairs for a deuteranope.
    m = colour.blindness.matrix_cvd_Machado2009("Deuteranomaly", 1.0)
    labs = []
    for hue in HUES:
        h = np.radians(hue)
        oklab = np.array([0.62, CHROMA * np.cos(h), CHROMA * np.sin(h)])
        linear = colour.XYZ_to_RGB(colour.Oklab_to_XYZ(oklab), SRGB, apply_cctf_encoding=False)
        labs.append(lab(m @ np.clip(linear, 0, 1)))
    assert min_difference(labs) < MIN_CVD / 2


def neutral(h):
    # A grey: OKLCH chroma below 0.01 (Ottosson 2020).
    lab_ = colour.XYZ_to_Oklab(colour.RGB_to_XYZ(to_linear(h), SRGB, apply_cctf_decoding=False))
    return float(np.hypot(lab_[1], lab_[2])) < 0.01


def test_every_colour_the_pictures_use_is_the_palette_or_a_grey():
    ours = set(palette())
    for f in sorted(PLOT.glob("*.rs")):
        text = f.read_text()
        for h in set(re.findall(r"#[0-9a-fA-F]{6}\b", text)):
            assert h in ours or neutral(h), f"{f.name}: {h} is neither in the palette nor a grey"
        # No colour names or hsl() either: every hue comes from the palette.
        assert not re.search(r"hsl\(|fill=\"(red|blue|orange|green)\"", text), f.name

"""The page's palette: contrast for reading, and marks still told apart under colour blindness.

The colours are read from the custom properties in ``service/page/static/page.css``, so a change
of palette is checked without editing this file.
"""

from __future__ import annotations

import itertools
import re
from importlib.resources import files

import numpy as np
import pytest

CSS = (files("service.page") / "static" / "page.css").read_text()
PALETTE = {
    name: value.lower()
    for name, value in re.findall(r"--([a-z0-9-]+):\s*(#[0-9a-fA-F]{6})\s*;", CSS)
}

# Simulation of dichromacy at full severity, applied to linear RGB: Machado, Oliveira & Fernandes,
# "A physiologically-based model for simulation of color vision deficiency", IEEE TVCG 15(6), 2009,
# table of matrices for severity 1.0 (from memory).
DICHROMACY = {
    "normal": np.eye(3),
    "protanopia": np.array(
        [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
         [-0.003882, -0.048116, 1.051998]]
    ),
    "deuteranopia": np.array(
        [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
         [-0.011820, 0.042940, 0.968881]]
    ),
    "tritanopia": np.array(
        [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
         [0.004733, 0.691367, 0.303900]]
    ),
}  # fmt: skip


def linear_rgb(hex_colour: str) -> np.ndarray:
    """sRGB to linear light: IEC 61966-2-1 transfer function (as quoted in WCAG 2.1's definition
    of relative luminance, W3C Recommendation 2018)."""
    c = np.array([int(hex_colour[i : i + 2], 16) / 255 for i in (1, 3, 5)])
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def luminance(hex_colour: str) -> float:
    """WCAG 2.1 relative luminance: 0.2126 R + 0.7152 G + 0.0722 B of linear light."""
    return float(np.dot([0.2126, 0.7152, 0.0722], linear_rgb(hex_colour)))


def contrast(a: str, b: str) -> float:
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05), the lighter luminance on top."""
    hi, lo = sorted((luminance(a), luminance(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def lab(linear: np.ndarray) -> np.ndarray:
    """CIE 1976 L*a*b* (D65 white) of linear sRGB; sRGB-to-XYZ matrix of IEC 61966-2-1."""
    to_xyz = np.array(
        [[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]
    )
    xyz = to_xyz @ np.clip(linear, 0.0, 1.0) / np.array([0.95047, 1.0, 1.08883])
    f = np.where(xyz > (6 / 29) ** 3, np.cbrt(xyz), xyz / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def delta_e(a: str, b: str, vision: str) -> float:
    """CIE76 colour difference of two colours as seen with ``vision``."""
    m = DICHROMACY[vision]
    return float(np.linalg.norm(lab(m @ linear_rgb(a)) - lab(m @ linear_rgb(b))))


def test_the_palette_is_read_from_the_stylesheet() -> None:
    assert {"paper", "ink", "band-50", "band-80", "band-95", "median", "actual"} <= set(PALETTE)
    # Our own check of the formulas above: WCAG 2.1 gives black on white as 21:1 (its definition
    # of contrast ratio: ratios "range from 1 to 21") and the luminance of white as 1.
    assert contrast("#000000", "#ffffff") == pytest.approx(21.0)
    assert luminance("#ffffff") == pytest.approx(1.0)
    # CIE L* of sRGB mid grey #777777 is about 50 (common practice, no source); white is L* = 100.
    assert lab(linear_rgb("#ffffff"))[0] == pytest.approx(100.0, abs=0.05)
    assert lab(linear_rgb("#777777"))[0] == pytest.approx(50.0, abs=1.0)


# WCAG 2.1 success criterion 1.4.3 (text, 4.5:1) and 1.4.11 (graphical objects, 3:1).
@pytest.mark.parametrize(
    ("fore", "back", "least"),
    [
        ("ink", "paper", 4.5), ("muted", "paper", 4.5), ("muted", "ground", 4.5),
        ("warn-ink", "warn-ground", 4.5), ("paper", "median", 4.5),  # button text
        ("median", "paper", 3.0), ("median", "band-95", 3.0), ("median", "band-80", 3.0),
        ("median", "band-50", 3.0), ("actual", "paper", 3.0), ("actual", "band-95", 3.0),
        ("history", "paper", 3.0), ("history", "far", 3.0), ("plug-in", "paper", 3.0),
        ("assured", "paper", 3.0), ("focus", "paper", 3.0), ("closed-line", "closed-ground", 3.0),
    ],
)  # fmt: skip
def test_contrast(fore: str, back: str, least: float) -> None:
    ratio = contrast(PALETTE[fore], PALETTE[back])
    assert ratio >= least, f"{fore} on {back}: {ratio:.2f}:1, need {least}:1"


# Marks a reader must tell apart. 10 CIE76 units: plainly different side by side (our threshold,
# common practice, no source); nested bands also differ in lightness alone, which survives every
# kind of dichromacy.
PAIRS = [
    ("band-50", "band-80"), ("band-80", "band-95"), ("band-95", "paper"), ("band-95", "far"),
    ("band-95", "closed-ground"), ("actual", "median"), ("actual", "band-50"),
    ("plug-in", "assured"), ("history", "median"),
]  # fmt: skip


@pytest.mark.parametrize("vision", sorted(DICHROMACY))
def test_marks_stay_apart_under_simulated_colour_blindness(vision: str) -> None:
    too_close = [
        f"{a}/{b}: {delta_e(PALETTE[a], PALETTE[b], vision):.1f}"
        for a, b in PAIRS
        if delta_e(PALETTE[a], PALETTE[b], vision) < 10.0
    ]
    assert not too_close, f"{vision}: {too_close}"


def test_nested_bands_step_in_lightness() -> None:
    lightness = [lab(linear_rgb(PALETTE[f"band-{lv}"]))[0] for lv in (95, 80, 50)]
    steps = [a - b for a, b in itertools.pairwise(lightness)]
    assert all(step >= 10.0 for step in steps), lightness

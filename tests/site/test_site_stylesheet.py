"""The stylesheet meets the brief: WCAG AA colour contrast, dark/light, print, focus."""

from __future__ import annotations

import re
from importlib import resources

import pytest

CSS = resources.files("relspan.site").joinpath("assets/site.css").read_text("utf-8")


def _block(css: str, start: int) -> str:
    depth, i = 0, css.index("{", start)
    for j in range(i, len(css)):
        depth += {"{": 1, "}": -1}.get(css[j], 0)
        if depth == 0:
            return css[i + 1:j]
    raise AssertionError("unbalanced braces")


def _vars(block: str) -> dict[str, str]:
    return dict(re.findall(r"(--[\w-]+):\s*(#[0-9a-fA-F]{6})\s*;", block))


LIGHT = _vars(_block(CSS, CSS.index(":root")))
DARK = {**LIGHT, **_vars(_block(CSS, CSS.index(":root", CSS.index("prefers-color-scheme: dark"))))}


def _luminance(hex_colour: str) -> float:
    # WCAG 2.2, definition "relative luminance" (sRGB linearisation, 0.03928 threshold)
    channels = [int(hex_colour[i:i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def contrast(a: str, b: str) -> float:
    # WCAG 2.2, definition "contrast ratio": (L1 + 0.05) / (L2 + 0.05)
    la, lb = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (la + 0.05) / (lb + 0.05)


# (text colour, background) pairs the stylesheet actually uses for text.
_TEXT_PAIRS = [
    ("--fg", "--bg"), ("--fg", "--surface"), ("--fg", "--surface-2"), ("--muted", "--bg"),
    ("--muted", "--surface"), ("--muted", "--surface-2"), ("--link", "--bg"),
    ("--link", "--surface"), ("--link", "--surface-2"), ("--link-visited", "--bg"),
    ("--link-visited", "--surface"), ("--fg", "--code-bg"),
    ("--pinned", "--surface"), ("--open", "--surface"), ("--depends", "--surface"),
    ("--unstable", "--surface"), ("--holds-fg", "--holds-bg"), ("--fails-fg", "--fails-bg"),
    ("--warning-fg", "--warning-bg"), ("--caution-fg", "--caution-bg"),
    ("--link", "--caution-bg"), ("--link", "--code-bg"),
]


def test_reference_contrast_formula_matches_known_values():
    # WCAG 2.2 understanding doc (recalled from memory): black on white is 21:1,
    # and #767676 on white is the lightest grey passing 4.5:1 (about 4.54:1).
    assert contrast("#000000", "#ffffff") == pytest.approx(21.0)
    assert contrast("#767676", "#ffffff") == pytest.approx(4.54, abs=0.01)


@pytest.mark.parametrize("scheme", ["light", "dark"])
@pytest.mark.parametrize("fg, bg", _TEXT_PAIRS)
def test_text_colours_meet_wcag_aa_in_both_schemes(scheme, fg, bg):
    colours = LIGHT if scheme == "light" else DARK
    ratio = contrast(colours[fg], colours[bg])
    assert ratio >= 4.5, f"{scheme}: {fg} on {bg} is {ratio:.2f}:1 (< 4.5:1, WCAG 1.4.3)"


@pytest.mark.parametrize("scheme", ["light", "dark"])
def test_focus_ring_meets_non_text_contrast(scheme):
    colours = LIGHT if scheme == "light" else DARK
    for bg in ("--bg", "--surface", "--surface-2"):
        assert contrast(colours["--focus"], colours[bg]) >= 3.0  # WCAG 1.4.11


def test_print_media_appends_no_link_targets():
    # printed links show their words only: no attr(href) anywhere in the stylesheet
    assert "attr(href)" not in CSS


def test_stylesheet_has_dark_print_focus_and_responsive_rules():
    for needle in ("prefers-color-scheme: dark", "@media print", ":focus-visible",
                   "max-width: 100%", "overflow-x: auto", "a::after, a::before { content: none !important; }"):
        assert needle in CSS


def test_stylesheet_loads_nothing_from_elsewhere():
    assert "url(" not in CSS and "@import" not in CSS and "http" not in CSS

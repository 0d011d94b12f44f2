"""The one module of words and numbers: how relspan writes a number, a count or a list.

Used by the findings interpreter (:mod:`relspan.analysis.findings`), the pages
(:mod:`relspan.report.pages`) and the figures' alt texts and descriptions
(:mod:`relspan.report.figures`). It sits beside :mod:`relspan.assumptions`
(the one table of noise assumptions) because every layer from analysis up
uses it, and analysis must not import report.

Two number styles, one implementation each, chosen by the caller's medium:

* :func:`fmt`: a number in a page's sentence or table cell: ``sig``
  significant digits in the shortest ``%g`` form, a typographic minus,
  "unbounded" for infinities and an em dash for a missing value;
* :func:`num`: a number in a figure's alt text or long description (read
  aloud by screen readers): plain positional notation between 0.001 and
  100000, ASCII minus, "missing" / "infinite" spelled out.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

__all__ = ["MISSING", "fmt", "num", "num_fig", "angle_text", "count", "plural", "join_words", "cap",
           "times", "digits_for", "fmt_range", "num_range", "WIDTH_DIGITS"]

#: how a page shows a value that does not exist
MISSING = "\u2014"

_NUMBER_WORDS = {0: "no", 1: "one", 2: "two", 3: "three", 4: "four", 5: "five", 6: "six"}


def fmt(x, digits: int = 3, *, minus: str = "\u2212", missing: str = MISSING) -> str:
    """A number for a page: ``digits`` significant digits; infinities say "unbounded".

    ``minus="-"`` keeps ASCII (for text also stored in JSON and CSV);
    ``missing`` is what None or NaN print as.

    Examples
    --------
    >>> fmt(-0.012345), fmt(float("inf")), fmt(None), fmt(2.5e-7, minus="-")
    ('−0.0123', 'unbounded', '—', '2.5e-07')
    """
    if x is None:
        return missing
    x = float(x)
    if math.isnan(x):
        return missing
    if math.isinf(x):
        return "unbounded"
    if x == 0:
        return "0"
    text = f"{x:.{digits}g}"
    return text if minus == "-" else text.replace("-", minus)


#: significant digits a shown width (high minus low) keeps: a range is printed so that its width
#: can be read to two significant digits
WIDTH_DIGITS = 2


def digits_for(*values, digits: int = 3, width_digits: int = WIDTH_DIGITS) -> int:
    """Significant digits that show ``values`` (a range or an interval) with its width readable.

    The one rule for every number shown beside another: at least ``digits``
    significant digits, and enough that the smallest gap between the values
    (the width of a range ``lo to hi``) keeps ``width_digits`` significant
    digits, so a range never prints as "2 to 2". Capped at 15 (float64).

    Examples
    --------
    >>> digits_for(2.001, 2.004), digits_for(0.42, 0.46), digits_for(1.0, 1.0)
    (5, 3, 3)
    """
    xs = sorted({float(v) for v in values if v is not None and math.isfinite(float(v))})
    if len(xs) < 2:
        return digits
    gap = min(b - a for a, b in zip(xs, xs[1:]))
    if gap <= 0:
        return digits
    last = math.floor(math.log10(gap)) - (width_digits - 1)  # decimal place of the last digit kept
    need = digits
    for x in xs:
        if x != 0:
            need = max(need, math.floor(math.log10(abs(x))) - last + 1)
    return int(min(max(need, digits), 15))


def fmt_range(lo, hi, *, sep: str = " to ", digits: int = 3, minus: str = "\u2212",
              missing: str = MISSING) -> str:
    """A range or interval for a page, both ends with the digits :func:`digits_for` chooses.

    Examples
    --------
    >>> fmt_range(2.0012, 2.0041, minus="-"), fmt_range(0.422, 0.456)
    ('2.0012 to 2.0041', '0.422 to 0.456')
    """
    d = digits_for(lo, hi, digits=digits)
    return f"{fmt(lo, d, minus=minus, missing=missing)}{sep}{fmt(hi, d, minus=minus, missing=missing)}"


def num_range(lo, hi, *, sep: str = " to ", sig: int = 3) -> str:
    """:func:`fmt_range` in the figures' style (:func:`num`): for alt texts and descriptions."""
    d = digits_for(lo, hi, digits=sig)
    return f"{num(lo, d)}{sep}{num(hi, d)}"


def num(x: float, sig: int = 3) -> str:
    """A number as it is printed in alt texts and descriptions (``sig`` significant digits).

    ASCII minus; negative zero printed as 0; infinities as "unbounded" is the caller's job.

    Examples
    --------
    >>> num(1234.5), num(0.00012), num(-0.0)
    ('1234', '1.2e-4', '0')
    """
    x = float(x)
    if math.isnan(x):
        return "missing"
    if math.isinf(x):
        return "infinite" if x > 0 else "minus infinite"
    if x == 0:
        return "0"
    ax = abs(x)
    if 1e-3 <= ax < 1e5:
        digits = max(sig - 1 - int(math.floor(math.log10(ax))), 0)
        text = f"{x:.{digits}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
    else:
        text = f"{x:.{sig - 1}e}"
        mant, exp = text.split("e")
        mant = mant.rstrip("0").rstrip(".") if "." in mant else mant
        text = f"{mant}e{int(exp)}"
    if text in ("-0", "-0.0"):
        text = "0"
    return text


def num_fig(x: float, sig: int = 3) -> str:
    """:func:`num` with a typographic minus, for text drawn inside figures."""
    return num(x, sig).replace("-", "\u2212")


def angle_text(deg: float) -> str:
    """An angle in degrees as printed in figure texts: one decimal, or two significant digits below 0.1."""
    deg = float(deg)
    if 0 < abs(deg) < 0.1:
        return num(deg, 2)
    return f"{deg:.1f}"


def count(k: int, noun: str) -> str:
    """"two relations", "one relation", "no relations" (numbers above six as digits)."""
    word = _NUMBER_WORDS.get(int(k), str(int(k)))
    many = noun if noun.endswith("s") else noun + "s"
    return f"{word} {noun if int(k) == 1 else many}"


def plural(k: int, word: str, many: str | None = None) -> str:
    """"1 window", "3 windows" (digits; ``many`` for irregular plurals)."""
    return f"{k} {word if k == 1 else (many or word + 's')}"


def join_words(items: Sequence[str]) -> str:
    """'a', 'a and b', 'a, b and c'."""
    items = list(items)
    if not items:
        return ""
    if len(items) == 1:
        return items[0]
    return ", ".join(items[:-1]) + " and " + items[-1]


def cap(text: str) -> str:
    """The text with its first letter in upper case."""
    return text[:1].upper() + text[1:]


def times(k: int) -> str:
    """"once", "twice", "3 times"."""
    return {1: "once", 2: "twice"}.get(k, f"{k} times")

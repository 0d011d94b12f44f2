"""``checks.resampling``: defaults, key-by-key overrides, located errors for bad values."""

from __future__ import annotations

import pytest

from relspan.errors import SpecError
from relspan.spec import load_spec
from relspan.spec.model import ResamplingSpec

from spec_texts import MINIMAL


def _with(text: str, block: str) -> str:
    return text.rstrip("\n") + "\n" + block


def test_defaults_are_499_resamples_at_90_percent_auto_scheme(write_spec):
    spec = load_spec(write_spec(MINIMAL))
    r = spec.datasets[0].checks.resampling
    assert r == ResamplingSpec() and (r.resamples, r.level, r.scheme, r.block_length, r.seed) == \
        (499, 0.90, "auto", "auto", None)


def test_top_level_keys_are_read(write_spec):
    spec = load_spec(write_spec(_with(MINIMAL, "checks:\n  resampling: {resamples: 0, level: 0.95, "
                                               "scheme: moving, block_length: 6, seed: 9}\n")))
    r = spec.datasets[0].checks.resampling
    assert (r.resamples, r.level, r.scheme, r.block_length, r.seed) == (0, 0.95, "moving", 6.0, 9)


@pytest.mark.parametrize("value, words", [
    ("{level: 1.2}", "checks.resampling.level must be < 1"),
    ("{resamples: -1}", "checks.resampling.resamples must be >= 0"),
    ("{scheme: blocks}", "checks.resampling.scheme must be one of"),
    ("{block_length: 0.5}", "checks.resampling.block_length"),
    ("{draws: 5}", "checks.resampling"),
])
def test_bad_values_are_located_with_a_fix(write_spec, value, words):
    text = _with(MINIMAL, f"checks:\n  resampling: {value}\n")
    path = write_spec(text)
    with pytest.raises(SpecError) as info:
        load_spec(path)
    msg = str(info.value)
    assert words in msg and "\n  Fix: " in msg
    assert msg.startswith(f"{path}:{len(text.splitlines())}: ")

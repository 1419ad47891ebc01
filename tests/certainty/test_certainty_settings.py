"""Certainty settings: the packaged default loads, and every bad value is refused with its
line and what to write (the line numbers are checked against the test's own edit of the text).
"""

from __future__ import annotations

import pytest

from exposhift.certainty.settings import (
    certainty_settings_from_text,
    load_certainty_settings,
    packaged_text,
)
from exposhift.errors import ConfigError


def _line_of(text: str, needle: str) -> int:
    return next(i for i, line in enumerate(text.splitlines(), 1) if line.startswith(needle))


def test_packaged_default_and_fingerprint():
    s = load_certainty_settings(None)
    assert s.start_level == "fair" and s.decision_ratio == 1.1
    assert s.large_ratio == 2.0 and s.large_ratio_two == 5.0 and s.max_steps_up == 2
    assert len(s.fingerprint()) == 64
    assert certainty_settings_from_text(packaged_text()).fingerprint() == s.fingerprint()
    other = certainty_settings_from_text(
        packaged_text().replace("decision_ratio = 1.1", "decision_ratio = 1.25")
    )
    assert other.fingerprint() != s.fingerprint()


@pytest.mark.parametrize(
    "old,new,needle,words",
    [
        ("decision_ratio = 1.1", "decision_ratio = 0.9", "decision_ratio", "ratio above 1"),
        ("decision_ratio = 1.1", "decision_ratio = -1.1", "decision_ratio", "ratio above 1"),
        ("decision_ratio = 1.1", "decision_ratio = 10", "decision_ratio", "not a percent"),
        (
            "decision_difference = 0.0",
            "decision_difference = -5.0",
            "decision_difference",
            "never negative",
        ),
        ('level = "fair"', 'level = "moderate"', "level =", "'firm', 'fair'"),
        ("ratio_two = 5.0", "ratio_two = 1.5", "ratio_two", "must be the larger"),
        (
            "weight_share = 0.5\nweight_share_two",
            "weight_share = 1.5\nweight_share_two",
            "weight_share = 1.5",
            "share above 0",
        ),
    ],
)
def test_bad_values_name_their_line(old, new, needle, words):
    text = packaged_text()
    assert old in text
    bad = text.replace(old, new, 1)
    with pytest.raises(ConfigError) as err:
        certainty_settings_from_text(bad, "c.toml")
    msg = str(err.value)
    assert msg.startswith("c.toml: line ") and words in msg and "nothing was loaded" in msg
    assert f"line {_line_of(bad, needle)}:" in msg


def test_unknown_and_missing_keys():
    text = packaged_text().replace("alpha_q = 0.10", "alpha_qq = 0.10")
    with pytest.raises(ConfigError) as err:
        certainty_settings_from_text(text, "c.toml")
    assert "unknown setting inconsistency.alpha_qq" in str(err.value)
    assert "inconsistency.alpha_q is missing" in str(err.value)


def test_syntax_error_and_missing_file(tmp_path):
    with pytest.raises(ConfigError, match="not valid TOML"):
        certainty_settings_from_text("[start\n", "c.toml")
    with pytest.raises(ConfigError, match="not found"):
        load_certainty_settings(tmp_path / "nope.toml")
    p = tmp_path / "mine.toml"
    p.write_text(packaged_text().replace('level = "fair"', 'level = "limited"'), encoding="utf-8")
    assert load_certainty_settings(p).start_level == "limited"
    assert load_certainty_settings(p).source == str(p)

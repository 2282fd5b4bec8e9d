"""Terminal output is safe (pointsift.terminal): control characters are escaped."""

import pytest

from pointsift.terminal import printable


@pytest.mark.parametrize(
    "raw, shown",
    [
        ("W0001", "W0001"),
        ("W1\x1b]0;owned\x07", "W1\\x1b]0;owned\\x07"),  # OSC sequence: retitles an xterm (ECMA-48 / xterm control sequences)
        ("W2\x1b[2J", "W2\\x1b[2J"),  # CSI erase display (ECMA-48)
        ("W3\nWrote /etc/passwd", "W3\\nWrote /etc/passwd"),  # a forged log line
        ("W4\rok", "W4\\rok"),
        ("W5\u202eabc", "W5\\u202eabc"),  # right-to-left override (Unicode bidi control)
        ("W6\x9b31m", "W6\\x9b31m"),  # C1 CSI
        ("Wéll ü 井", "Wéll ü 井"),  # ordinary letters stay
    ],
)
def test_control_characters_are_escaped(raw, shown):
    assert printable(raw) == shown


def test_newlines_kept_only_when_asked():
    assert printable("a\nb\x1b", keep_newlines=True) == "a\nb\\x1b"

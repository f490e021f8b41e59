"""ikgen.errors: user text in messages is escaped and cut (quote, clip, printable, safe_message).

Reference: Python's own definitions: str.isprintable (Unicode general categories Cc, Cf, Cs,
Co, Cn, Zl, Zp and Zs other than the space are not printable) and the 'unicode_escape' codec
(the escapes shown), from the Python 3.11 library reference, "Built-in Types" and "codecs".
"""

from __future__ import annotations

import pytest
from hypothesis import given, strategies as st

from ikgen.errors import (MESSAGE_LIMIT, VALUE_LIMIT, ArmFileError, IkgenError, clip, printable, quote,
                          safe_message)


@pytest.mark.parametrize("text, shown", [
    ("qz\x07", "qz\\x07"),                 # BEL
    ("a\nb\tc", "a\\nb\\tc"),
    ("x\u202ey", "x\\u202ey"),             # right-to-left override (Cf)
    ("wa\x9bist", "wa\\x9bist"),           # C1 control CSI
    ("\x1b[2J", "\\x1b[2J"),               # an escape sequence that would clear the screen
    ("caf\u00e9 \u00c5ngstr\u00f6m", "caf\u00e9 \u00c5ngstr\u00f6m"),   # letters stay as they are
])
def test_printable_escapes_what_a_terminal_would_act_on(text, shown):
    assert printable(text) == shown


def test_quote_and_clip_cut_long_values_with_their_length():
    assert quote("abc") == "'abc'"
    long = "n" * 100_000
    assert quote(long) == "'" + "n" * VALUE_LIMIT + "...' (100,000 characters)"
    assert clip(long) == "n" * VALUE_LIMIT + "... (100,000 characters)"
    assert clip(12345) == "12345"


@given(st.text(max_size=300))
def test_quoted_values_are_short_and_printable(text):
    shown = quote(text)
    assert shown.isprintable()
    assert len(shown) <= 2 + 10 * VALUE_LIMIT + 40      # an escape is at most 10 characters (\U0010ffff)


def test_every_ikgen_error_message_is_made_safe():
    assert str(IkgenError("bad \x07 value")) == "bad \\x07 value"
    message = str(IkgenError("x" * (MESSAGE_LIMIT + 500)))
    assert len(message) < MESSAGE_LIMIT + 60 and message.endswith("characters cut)")
    assert safe_message("ok") == "ok"


def test_arm_file_error_cuts_a_long_path():
    error = ArmFileError("d/" * 300 + "arm.toml", "", "problem", "something")
    assert "(608 characters)" in str(error) and len(str(error)) < 300

"""Terminal control codes escaped, printable text kept (investigator.printable).

The controls are those of ECMA-48 (C0: U+0000-U+001F, DEL U+007F, C1: U+0080-U+009F, where U+009B is the
one-character CSI) and the bidirectional formatting characters of Unicode UAX #9 (embeddings and overrides
U+202A-U+202E, isolates U+2066-U+2069, marks U+200E/U+200F); the escapes are Python's own
``unicode_escape`` spelling (Python documentation, "Text Encodings").
"""

from __future__ import annotations

import pytest

from investigator.printable import printable

C0_C1 = [chr(c) for c in (*range(0x00, 0x20), 0x7F, *range(0x80, 0xA0))]
BIDI = [chr(c) for c in (*range(0x202A, 0x202F), *range(0x2066, 0x206A), 0x200E, 0x200F)]


@pytest.mark.parametrize("char", C0_C1 + BIDI + ["\u2028", "\u2029", "\ufeff", "\ud800"])
def test_every_control_is_escaped(char):
    out = printable(f"a{char}b")
    assert out == "a" + char.encode("unicode_escape").decode("ascii") + "b"
    assert out.isascii() and out.isprintable()


def test_the_readable_forms():
    assert printable("\x1b[2J") == "\\x1b[2J"
    assert printable("\x1b]0;title\x07") == "\\x1b]0;title\\x07"
    assert printable("x\rover\bback") == "x\\rover\\x08back"
    assert printable("\u202eevil") == "\\u202eevil"


@pytest.mark.parametrize("text", ["café", "東京都", "Ünïcödé ñ", "naïve façade", "1\u00a0000", "a b", "[bold]x[/]",
                                  "€ ≥ ½"])
def test_printable_text_is_kept(text):
    assert printable(text) == text


def test_line_breaks_kept_only_when_asked():
    assert printable("a\nb") == "a\\nb"
    assert printable("a\nb\x1b", keep_newlines=True) == "a\nb\\x1b"
    assert printable(12.5) == "12.5"

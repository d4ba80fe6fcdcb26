"""Reading text files: encodings, TOML errors with lines, locating fields."""

from __future__ import annotations

import pytest

from kinfit.core.errors import KinfitError
from kinfit.inputs.sources import decode, find_line, load_toml


def test_decode_accepts_utf8_bom_utf16_and_crlf():
    assert decode("\ufeffa,b\r\n1,2\r\n".encode("utf-8"), "f") == "a,b\n1,2\n"
    assert decode("a,µ\n".encode("utf-16"), "f") == "a,µ\n"


def test_decode_refuses_latin1_with_the_line():
    with pytest.raises(KinfitError, match=r"f, line 2: byte 0xb5 is not valid UTF-8"):
        decode("a\n\u00b5M\n".encode("latin-1"), "f")


def test_decode_refuses_binary():
    with pytest.raises(KinfitError, match="NUL"):
        decode(b"a\x00b", "f")


def test_toml_error_names_line_and_column(tmp_path):
    path = tmp_path / "m.toml"
    path.write_text('name = "x"\nrate = k * [A]\n', encoding="utf-8")
    with pytest.raises(KinfitError, match=r"m\.toml, line 2, column \d+: not valid TOML"):
        load_toml(path, "model file")


def test_find_line():
    text = ('name = "x"\n\n[[steps]]\nreaction = "A -> B"\nrate = "k*[A]"\n'
            '[[steps]]\nreaction = "B -> C"\nrate = "k2*[B]"\n[parameters]\nk = 1\n')
    assert find_line(text, "name") == 1
    assert find_line(text, None, "steps", 1) == 6
    assert find_line(text, "rate", "steps", 1) == 8
    assert find_line(text, "rate", "steps", 0) == 5
    assert find_line(text, "k", "parameters") == 10
    assert find_line(text, "missing", "parameters") is None

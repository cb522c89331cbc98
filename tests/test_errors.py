"""Every error and warning of spaceframe is one line of limited length."""

from __future__ import annotations

import pickle

import pytest

import spaceframe as sf
from spaceframe import errors
from spaceframe.errors import MESSAGE_LIMIT, ModelError, SpaceframeError, one_line

#: Every class spaceframe.errors exports, read from the module so that a new one is covered.
CLASSES = [getattr(errors, n) for n in errors.__all__ if isinstance(getattr(errors, n), type)]
#: The errors among them (the warning is checked on its own below).
ALL = [cls for cls in CLASSES if issubclass(cls, SpaceframeError)]


def test_the_errors_are_found_and_the_package_root_exports_each() -> None:
    assert SpaceframeError in ALL and ModelError in ALL and errors.SpaceframeWarning not in ALL
    missing = [cls.__name__ for cls in CLASSES if getattr(sf, cls.__name__, None) is not cls]
    assert missing == []


@pytest.mark.parametrize("cls", ALL)
def test_library_text_with_newlines_becomes_one_escaped_line(cls: type[Exception]) -> None:
    # ezdxf quotes a damaged group code with its line break.
    err = cls('f.dxf: Invalid group code "$DIMGAP\n" at line 12.\n')
    assert str(err) == 'f.dxf: Invalid group code "$DIMGAP\\n" at line 12.'


@pytest.mark.parametrize("cls", ALL)
def test_huge_message_is_capped_keeping_both_ends(cls: type[Exception]) -> None:
    # A non-Wavefront .obj once gave a message of 98,610 characters.
    text = "model.obj: bad line " + "v" * 98_590 + " (line 3)"
    shown = str(cls(text))
    assert len(shown) <= MESSAGE_LIMIT
    assert shown.startswith("model.obj: bad line vvv") and shown.endswith("vvv (line 3)")
    left_out = int(shown.split("...[")[1].split(" characters")[0])
    kept = len(shown) - len(shown.split(" ...[")[1].split("]... ")[0]) - len(" ...[]... ")
    assert left_out + kept == len(text)


def test_control_characters_cannot_drive_the_terminal() -> None:
    assert one_line("layer \x1b[31mRED\x1b[0m\ttab\r") == "layer \\x1b[31mRED\\x1b[0m\\ttab"
    assert one_line("short") == "short"
    assert one_line("a" * MESSAGE_LIMIT) == "a" * MESSAGE_LIMIT


def test_warnings_are_one_line_too() -> None:
    with pytest.warns(errors.SpaceframeWarning) as record:
        import warnings

        warnings.warn("two\nlines " + "w" * 5000, errors.SpaceframeWarning, stacklevel=1)
    text = str(record[0].message)
    assert "\n" not in text and len(text) <= MESSAGE_LIMIT and text.startswith("two\\nlines ww")


def test_errors_keep_their_attributes_and_classes() -> None:
    err = errors.MechanismError("mode 1\nmoves node 2", nodes=[2], directions=["x"])
    assert str(err) == "mode 1\\nmoves node 2" and err.nodes.tolist() == [2]
    assert isinstance(errors.ReadError("x"), OSError) and isinstance(ModelError("x"), ValueError)
    assert str(pickle.loads(pickle.dumps(errors.ReadError("a\nb")))) == "a\\nb"
    assert sf.ReadError is errors.ReadError

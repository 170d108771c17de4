"""sensormodel.errors: the one-line message format, builtin bases, pickling."""

from __future__ import annotations

import pickle

import pytest

from sensormodel._io import OutputExistsError
from sensormodel.errors import (
    AnalysisError,
    DatasheetError,
    ModelFileError,
    RecordingError,
    SensorModelError,
    UnitError,
)

CLASSES = [
    SensorModelError,
    UnitError,
    DatasheetError,
    ModelFileError,
    RecordingError,
    AnalysisError,
]


@pytest.mark.parametrize(
    ("kwargs", "text"),
    [
        (
            dict(expected="a number", source="a.toml", field="gyro.x"),
            "a.toml:gyro.x: got 3; expected a number",
        ),
        (dict(expected="a number", source="a.toml"), "a.toml: got 3; expected a number"),
        (dict(expected="a number", field="gyro.x"), "gyro.x: got 3; expected a number"),
        (dict(expected="a number"), "got 3; expected a number"),
        (dict(source="a.toml", field="line 4"), "a.toml:line 4: got 3"),
        ({}, "got 3"),
    ],
)
def test_str_format_is_pinned(kwargs, text):
    # DESIGN §6: <file>[:<field or line>]: <what is wrong>; <what is expected>
    assert str(SensorModelError("got 3", **kwargs)) == text


def test_str_stays_on_one_line():
    # a value quoted in the message may hold a line break (a TOML multi-line string)
    exc = UnitError("cannot read '0.1 deg\n/h'", "a rate", source="a.toml", field="gyro.x")
    assert str(exc) == "a.toml:gyro.x: cannot read '0.1 deg /h'; expected a rate"


@pytest.mark.parametrize("cls", CLASSES + [OutputExistsError], ids=lambda c: c.__name__)
def test_pickle_round_trip(cls):
    exc = cls("got 3", "a number", source="a.toml", field="gyro.x")
    back = pickle.loads(pickle.dumps(exc))
    assert type(back) is cls
    assert str(back) == str(exc) == "a.toml:gyro.x: got 3; expected a number"
    assert (back.problem, back.expected, back.source, back.field) == (
        "got 3",
        "a number",
        "a.toml",
        "gyro.x",
    )


@pytest.mark.parametrize("cls", CLASSES[1:], ids=lambda c: c.__name__)
def test_subclasses_are_value_errors(cls):
    assert issubclass(cls, SensorModelError)
    assert issubclass(cls, ValueError)


def test_output_exists_is_a_file_exists_error():
    exc = OutputExistsError("the file exists", "--force", source="m.json")
    assert isinstance(exc, SensorModelError)
    assert isinstance(exc, FileExistsError)
    assert str(exc) == "m.json: the file exists; expected --force"


def test_located_fills_only_what_is_missing():
    exc = DatasheetError("got 3", "a number", field="gyro.x")
    moved = exc.located(source="a.toml", field="ignored")
    assert type(moved) is DatasheetError
    assert (moved.source, moved.field) == ("a.toml", "gyro.x")
    assert str(moved) == "a.toml:gyro.x: got 3; expected a number"
    assert exc.source is None  # the original is unchanged


def test_raised_and_caught_as_builtin():
    with pytest.raises(ValueError, match=r"^gyro\.x: got 3$"):
        raise UnitError("got 3", field="gyro.x")

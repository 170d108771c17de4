"""Shared fixtures: a CLI runner, the example datasheets, a datasheet writer.

Reference values with their sources live in ``tests/reference/`` (import them as
``from reference import units``; pytest puts ``tests/`` on the path).
"""

from __future__ import annotations

import pathlib
from collections.abc import Callable

import pytest
from click.testing import CliRunner

ROOT = pathlib.Path(__file__).resolve().parent.parent
EXAMPLES = ROOT / "examples"
SCHEMAS = ROOT / "schemas"
#: Every example datasheet shipped in examples/.
EXAMPLE_DATASHEETS = sorted(EXAMPLES.glob("*.toml"))


@pytest.fixture
def runner() -> CliRunner:
    """A click runner that keeps stderr apart from stdout (``result.stdout``/``.stderr``).

    click >= 8.2 always separates them; click 8.1 needs ``mix_stderr=False``.
    """
    try:
        return CliRunner(mix_stderr=False)  # type: ignore[call-arg]
    except TypeError:
        return CliRunner()


@pytest.fixture
def examples_dir() -> pathlib.Path:
    """The folder of the example datasheets."""
    return EXAMPLES


@pytest.fixture(params=EXAMPLE_DATASHEETS, ids=lambda p: p.stem)
def example_datasheet(request: pytest.FixtureRequest) -> pathlib.Path:
    """Each example datasheet in turn (a parametrized fixture)."""
    return request.param


@pytest.fixture
def write_datasheet(tmp_path: pathlib.Path) -> Callable[..., pathlib.Path]:
    """``write_datasheet(text, name="sheet.toml")`` writes a TOML datasheet under ``tmp_path``."""

    def write(text: str, name: str = "sheet.toml") -> pathlib.Path:
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path

    return write

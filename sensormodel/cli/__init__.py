"""The ``sensormodel`` command line: each command parses, calls one library function, prints.

No maths here. The modules of this package:

- ``_app``: the command group, the one error boundary (``guarded``), the progress bar;
- ``_types``: click parameter types that check option values where they are parsed;
- ``_options``: the one set of recording options of every command that reads a recording;
- one module per family of commands: ``_model`` (build, inspect, export, drift, shape),
  ``_recording`` (allan, identify, simulate), ``_acceptance`` (verify, plan), ``_demo``.

The text the commands print comes from :mod:`sensormodel.report`.
"""

from __future__ import annotations

from . import _acceptance, _demo, _model, _recording
from ._app import cli, main

__all__ = ["cli", "main"]

for _family in (_model, _recording, _acceptance, _demo):
    for _command in _family.COMMANDS:
        cli.add_command(_command)

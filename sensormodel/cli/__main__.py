"""``python -m sensormodel.cli``: the same as the ``sensormodel`` console script."""

from ._app import main

main()

"""``python -m estimator`` runs the ``lowflow`` command line."""

from .cli import main

main()

"""``python -m simulator`` runs the ``noisechain`` command line."""

from simulator.cli.parser import entry_point

entry_point()

"""Command line: ``noisechain VERB ...`` (also ``python -m simulator``).

The top of the pipeline: the argument parser and exit statuses
(:mod:`~simulator.cli.parser`) and one function per verb
(:mod:`~simulator.cli.commands`).
"""

from simulator.cli.parser import entry_point, main  # noqa: F401  (the console script's target)

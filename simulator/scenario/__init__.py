"""Scenario: the TOML file, validated into a frozen value in SI units.

The first stage of the pipeline. :mod:`~simulator.scenario.loader` reads and
checks a file (unknown, missing and mistyped keys, ranges, cross-section
checks such as the local oscillator's reference) into a
:class:`~simulator.scenario.loader.Scenario`; :mod:`~simulator.scenario.schema`
is the declarative walker the checks and the generated reference
(docs/scenario-reference.md) share; :mod:`~simulator.scenario.sections` and
:mod:`~simulator.scenario.sweep_section` declare the sections;
:mod:`~simulator.scenario.labels` names parameter paths in words, with
symbols and units, for figures, reports and planners. Nothing here
knows any physics beyond units and ranges.
"""

"""Report: figures and the self-contained HTML report, at the edge of the pipeline.

Spectrum, record and sweep figures (:mod:`~simulator.report.plots`,
:mod:`~simulator.report.record_plots`, :mod:`~simulator.report.sweep_plots`)
in one colour per noise source (:mod:`~simulator.report.colours`), the answer
a report leads with (:mod:`~simulator.report.summary`), the trial report
(:mod:`~simulator.report.trial_report`) and the HTML page that holds them
(:mod:`~simulator.report.html`). matplotlib is imported here only, and always
with its non-interactive backend passed explicitly, never switched for the user.
"""

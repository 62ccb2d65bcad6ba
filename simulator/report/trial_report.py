"""HTML report of a validation run: per-quantity table, histograms and pull plots."""

import tempfile
from pathlib import Path

import numpy as np

from simulator.report import html


def _figure(dataset, q, truth, path):
    from simulator.report.plots import save_figure, subplots

    est = dataset["estimate"].sel(quantity=q).values
    unc = dataset["uncertainty"].sel(quantity=q).values
    ok = np.isfinite(est) & np.isfinite(unc) & (unc > 0)
    fig, axes = subplots(1, 2 if truth is not None else 1, figsize=(10, 3.6),
                         squeeze=False, layout="constrained")
    ax = axes[0, 0]
    ax.hist(est[ok], bins=max(8, int(np.sqrt(ok.sum()))), color="tab:blue", alpha=0.75,
            label="estimates")
    if truth is not None:
        ax.axvline(truth, color="k", lw=2, label=f"truth {truth:.7g}")
    ax.axvline(np.mean(est[ok]), color="tab:orange", ls="--",
               label=f"mean {np.mean(est[ok]):.7g}")
    ax.set_xlabel(q)
    ax.set_ylabel("trials")
    ax.yaxis.get_major_locator().set_params(integer=True)
    ax.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncols=3,
                  frameon=False)
    if truth is not None:
        pulls = (est[ok] - truth) / unc[ok]
        ax = axes[0, 1]
        edges = np.linspace(-5, 5, 41)
        ax.hist(np.clip(pulls, -5, 5), bins=edges, density=True, color="tab:green",
                alpha=0.75, label="pulls (clipped at ±5)")
        x = np.linspace(-5, 5, 400)
        ax.plot(x, np.exp(-x**2 / 2) / np.sqrt(2 * np.pi), "k-",
                label="unit normal (honest errors)")
        ax.set_xlabel("(estimate − truth) / stated uncertainty")
        ax.set_ylabel("density")
        ax.legend(fontsize=8, loc="upper center", bbox_to_anchor=(0.5, -0.2), ncols=3,
                  frameon=False)
    fig.suptitle(f"{q}: {ok.sum()} trials")
    save_figure(fig, path, overwrite=True)  # the trial's own folder


def _text(x):
    return "—" if x is None else x


def _tests_in_words(result):
    """How the verdicts test, or why there is none yet (too few trials, no truth)."""
    levels = sorted({q.level for q in result.quantities if q.level is not None})
    if not levels:
        return ("No quantity is tested yet: a verdict needs a truth and enough successful "
                "trials (each quantity's line above says which is missing); rerun with more "
                "--trials, the trials done are kept. ")
    return ("The verdict tests each at a two-sided level of "
            f"{', '.join(f'{v:.2g}' for v in levels)} per quantity, a family-wise level "
            "shared among the quantities with a truth (Bonferroni): the bias by Student's "
            "t with N − 1 degrees of freedom, the pull width by its exact χ² interval, the "
            "coverage by the Clopper–Pearson interval; each verdict names the statistic "
            "and its threshold. ")


def write_trial_report(result, scenario, estimator, path):
    """Write the report page of a :class:`simulator.workflows.trial.TrialResult`.

    The page leads with the verdict of each quantity (truth, mean ± spread,
    verdict in words), then the statistics behind it in a second table narrow
    enough for a 1280 px screen, the figures, the failed trials and, folded at
    the end, the scenario.
    """
    verdicts = html.table(
        [[q.name, _text(q.truth), q.mean, q.spread, q.verdict] for q in result.quantities],
        header=["quantity", "truth", "mean", "spread", "verdict"])
    statistics = html.table(
        [[q.name, q.trials, q.failures, _text(q.bias), _text(q.bias_error), _text(q.rmse),
          _text(q.pull_width), _text(q.coverage_1sigma), _text(q.coverage_2sigma)]
         for q in result.quantities],
        header=["quantity", "trials", "failures", "bias", "± (s.e.)", "rms error",
                "pull width", "1σ coverage", "2σ coverage"])
    figures = []
    with tempfile.TemporaryDirectory() as tmp:
        for i, q in enumerate(result.quantities):
            png = Path(tmp) / f"q{i}.png"
            _figure(result.dataset, q.name, q.truth, png)
            figures.append(html.figure(png, f"{q.name}: estimates over the trials and their "
                                            "pulls against the truth"))
    errors = ("<p>No trial failed.</p>" if not result.errors else html.table(
        [[i, e] for i, e in result.errors[:50]], header=["trial", "error"]))
    sections = [
        ("Verdicts", verdicts),
        ("Statistics", "<p>Expected for an unbiased estimator with honest uncertainties: "
                       "bias zero, pull width 1, coverage 68.3 % (1σ) and 95.4 % (2σ). "
                       + _tests_in_words(result) + "</p>" + statistics),
        ("Histograms and pulls", "\n".join(figures)),
        ("Failed trials", errors),
        ("Scenario", html.folded(f"scenario file ({scenario.source}), as run",
                                 html.preformatted(scenario.to_toml()))),
    ]
    return html.write_report(path, f"noisechain trial: {scenario.scenario.name}", sections,
                             meta=f"estimator {estimator} · "
                                  f"{result.dataset.sizes['trial']} trials · record "
                                  f"{result.dataset.attrs['duration_s']:.6g} s")

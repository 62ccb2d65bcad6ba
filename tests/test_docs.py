"""The documentation cannot drift from the code.

- ``docs/scenario-reference.md`` is exactly what the loader's schema generates.
- Every scenario key that ``docs/physics.md`` names in backticks
  (``section.key`` or ``mechanics[0].key``) exists in the schema.
- Relative links in the docs and module paths in ``DEVELOPERS.md`` resolve.
- The heterodyne sign convention that ``docs/physics.md`` states holds for the
  state-space model, and a record passed through the project's periodogram
  shows it on the same axis (the FFT sign trap is handled once).
- The repository stands alone: every file a doc, test or module cites exists,
  and none cites a note file that is not in the repository or an issue number.
"""

import difflib
import re
from pathlib import Path

import numpy as np
import pytest
from conftest import mode, scenario_with_coupling

from simulator.analysis.psd import averaged_periodogram
from simulator.linear.spectra import heterodyne_spectrum
from simulator.linear.steady_state import steady_state
from simulator.model.system import System
from simulator.model.units import angular
from simulator.scenario import schema
from simulator.scenario.loader import Scenario, load_scenario, scenario_from_dict
from simulator.workflows.record import simulate_record

REPO = Path(__file__).resolve().parents[1]
DOCS = REPO / "docs"
REGENERATE = ".venv/bin/python -m simulator.scenario > docs/scenario-reference.md"

# `section.key` or `section[i].key` inside backticks; i may be a digit or a letter.
KEY_MENTION = re.compile(r"`([a-z_]+)(?:\[\w+\])?\.([a-z_]+)`")


def schema_keys(twins=False):
    """Section name → set of its key names, read from the loader's schema.

    ``twins``: also the ``<name>_dbm`` twin of every power key ``<name>_w``
    (simulator/scenario/units.py), which the docs may name.
    """
    keys = {}
    for f in schema.public_fields(Scenario):
        kind, cls, _ = schema.field_kind(Scenario, f.name)
        if kind != "scalar":
            keys[f.name] = {sub.name for sub in schema.public_fields(cls)}
            keys[f.name] |= set() if not twins else {sub.name.removesuffix("_w") + "_dbm"
                             for sub in schema.public_fields(cls)
                             if sub.metadata.get("unit") == "W"}
    return keys


FILE_EXTENSIONS = {"py", "md", "toml", "h5", "nc", "json", "png", "csv", "html", "txt"}


def key_problems(text):
    """Scenario-key mentions in ``text`` that the schema does not have.

    A mention whose first part is a section must name a key of that section.
    A first part that is not a section but close to one (a typo such as
    ``drvie``) is also reported; anything else (``simulator.model.optomechanics``,
    ``demo.toml``) is not a scenario key and is ignored.
    """
    keys = schema_keys(twins=True)
    problems, checked = [], 0
    for section, key in KEY_MENTION.findall(text):
        if key in FILE_EXTENSIONS:  # a file name such as `record.py`, not a key
            continue
        if section in keys:
            checked += 1
            if key not in keys[section]:
                close = difflib.get_close_matches(key, sorted(keys[section]), n=1)
                hint = f" (did you mean {section}.{close[0]}?)" if close else ""
                problems.append(f"{section}.{key}: no key {key!r} in [{section}]{hint}")
        elif difflib.get_close_matches(section, list(keys), n=1, cutoff=0.8):
            problems.append(f"{section}.{key}: no section [{section}]")
    return problems, checked


def test_scenario_reference_matches_schema():
    path = DOCS / "scenario-reference.md"
    expected = schema.reference_markdown(Scenario)
    actual = path.read_text(encoding="utf-8") if path.exists() else ""
    if actual != expected:
        diff = "\n".join(difflib.unified_diff(
            actual.splitlines(), expected.splitlines(), "docs/scenario-reference.md",
            "generated from the schema", lineterm="", n=1))
        pytest.fail(f"docs/scenario-reference.md disagrees with the loader's schema; "
                    f"regenerate it with\n    {REGENERATE}\n{diff[:3000]}")


def test_reference_lists_every_key():
    text = (DOCS / "scenario-reference.md").read_text(encoding="utf-8")
    for section, names in schema_keys().items():
        assert f"[{section}]" in text
        for name in names:
            assert f"| `{name}` |" in text, f"{section}.{name} missing from the reference"


def test_key_checker_catches_drift():
    problems, checked = key_problems(
        "`drive.power_w` `drive.power_mw` `drvie.power_w` `mechanics[0].coupling_hz` "
        "`simulator.model.optomechanics` `demo.toml` `record.py`")
    assert checked == 3
    assert len(problems) == 2
    assert "drive.power_mw" in problems[0] and "drive.power_w" in problems[0]
    assert "drvie" in problems[1]


@pytest.mark.parametrize("name", ["physics.md", "index.md", "../DEVELOPERS.md"])
def test_scenario_keys_in_docs_exist(name):
    problems, checked = key_problems((DOCS / name).read_text(encoding="utf-8"))
    assert not problems, f"docs/{name} names scenario keys the loader does not have:\n" + \
        "\n".join(problems)
    if name == "physics.md":
        assert checked >= 10, "physics.md should name the scenario keys it explains"


LINK = re.compile(r"\]\(([^)#\s]+)(?:#[^)]*)?\)")


@pytest.mark.parametrize("path", sorted(DOCS.glob("*.md")) + [REPO / "DEVELOPERS.md"],
                         ids=lambda p: p.name)
def test_relative_links_resolve(path):
    text = path.read_text(encoding="utf-8")
    broken = [target for target in LINK.findall(text)
              if "://" not in target and not (path.parent / target).exists()]
    assert not broken, f"{path.name}: links to missing files {broken}"


@pytest.mark.parametrize("guide", ["DEVELOPERS.md", "docs/architecture.md"])
def test_guides_tour_every_stage_of_the_package(guide):
    """Every sub-package (a stage of the pipeline) is named; every path named exists."""
    text = (REPO / guide).read_text(encoding="utf-8")
    named = set(re.findall(r"`(simulator/[\w/]+(?:\.py|/))`", text))
    stages = {f"simulator/{p.name}/" for p in (REPO / "simulator").iterdir()
              if (p / "__init__.py").exists() and p.name != "data"}
    assert not stages - named, f"{guide} does not name the stage(s) {sorted(stages - named)}"
    missing = sorted(p for p in named if not (REPO / p).exists())
    assert not missing, f"{guide} names modules that do not exist: {missing}"


def test_heterodyne_sign_convention_of_the_state_space():
    """ν > 0 carries the anti-Stokes photons (∝ n), ν < 0 the Stokes ones (∝ n + 1).

    For z = X_out + iY_out ∝ a_out the symmetrised spectrum from
    ``StateSpace.output_spectrum`` is S_z(ω) = 1 + 2N(ω), with N the
    normal-ordered output photon-flux density. With vacuum inputs at the
    cavity, the sideband fluxes are the weak-coupling rates times the
    occupations, (κ_ex/κ)·A−·n on the anti-Stokes side and (κ_ex/κ)·A+·(n + 1)
    on the Stokes side (Marquardt, Chen, Clerk, Girvin, PRL 99, 093902 (2007);
    Safavi-Naeini et al., PRL 108, 033602 (2012)). A wrong sign
    convention swaps them, a factor of about 40 here.
    """
    demo = load_scenario(REPO / "simulator" / "data" / "demo.toml")
    scenario = demo.replace("drive.power_w", demo.drive.power_w / 20)  # g/κ ≈ 0.02
    system = System(scenario)
    model = system.model
    mode = steady_state(system).modes[0]
    centre = angular(mode.effective_frequency_hz)
    width = angular(mode.effective_linewidth_hz)
    offsets = np.linspace(-300 * width, 300 * width, 60001)
    flux = {}
    for side in (+1, -1):
        omega = side * centre + offsets
        s = model.output_spectrum(omega)
        s_z = (s[:, 0, 0] + s[:, 1, 1] + 1j * (s[:, 1, 0] - s[:, 0, 1])).real
        flux[side] = np.trapezoid((s_z - 1) / 2, omega) / (2 * np.pi)
    escape = scenario.cavity.external_linewidth_hz / scenario.cavity.linewidth_hz
    n = mode.occupation
    anti_stokes = escape * angular(mode.anti_stokes_rate_hz) * n
    stokes = escape * angular(mode.stokes_rate_hz) * (n + 1)
    assert flux[+1] == pytest.approx(anti_stokes, rel=0.01)
    assert flux[-1] == pytest.approx(stokes, rel=0.01)


def test_project_periodogram_puts_the_anti_stokes_sideband_of_a_record_at_plus_f_m():
    """The record → periodogram link keeps the model's sign: anti-Stokes at +f_m.

    numpy's forward FFT, which :func:`simulator.analysis.psd.averaged_periodogram`
    uses, has the kernel exp(−2πi mk/n) (numpy.fft module documentation),
    opposite to the model's x(t) = ∫dω/2π e^(−iωt) x(ω) (docs/physics.md §12):
    a field component above the drive, e^(−iνt), lands at −ν. The premise is
    checked first on the project's own periodogram. The one place that
    corrects it is the receiver's output matrix (the record is the complex
    conjugate of the field; docs/records.md, "Sign convention"), so a record
    of a red-detuned drive, through the analysis periodogram, must follow
    the model's two-sided spectrum ``heterodyne_spectrum`` on the same axis,
    not its mirror image. The sampled spectrum is 1 + (S − 1)·sinc²(f/fs):
    integrate-and-dump sampling, whose white floor's aliases sum to 1
    (docs/records.md, "Digitiser"). Boxcar bins are independent with
    standard deviation E/√K (Bartlett, Nature 161, 686 (1948)), which sets
    the z-scores of the band powers at ±f_m.
    """
    rate, segment = 2e6, 1024
    t = np.arange(segment) / rate
    field_above_drive = np.exp(-2j * np.pi * 125e3 * t)  # e^(−iνt): anti-Stokes light
    premise = averaged_periodogram(field_above_drive, rate, segment_samples=segment,
                                   window="boxcar")
    assert premise.frequency_hz[np.argmax(premise.density)] == pytest.approx(-125e3)

    base = scenario_with_coupling(
        g_hz=40e3, linewidth_hz=600e3, detuning_hz=-300e3,
        modes=[mode(frequency_hz=300e3, linewidth_hz=3e3, coupling_hz=200.0,
                    bath_occupation=20.0, effective_mass_kg=1e-13)])
    data = base.to_dict()
    data["digitizer"] = {"sample_rate_hz": rate}
    data["record"] = {"duration_s": (1 << 18) / rate}
    scenario = scenario_from_dict(data, source="<red-detuned record>")
    record = simulate_record(scenario, seed=11)
    est = averaged_periodogram(record.shot_noise_units(), rate, segment_samples=segment,
                               window="boxcar")
    f = est.frequency_hz
    fm = record.truth.effective_frequency_hz[0]

    def sampled(nu):
        return 1 + (heterodyne_spectrum(scenario, nu).total - 1) * np.sinc(nu / rate) ** 2

    bands = [np.abs(f - side * fm) < 60e3 for side in (+1, -1)]

    def z_scores(expected):
        """Band power at +f_m and −f_m against ``expected``, in standard errors."""
        return np.array([(np.sum(est.density[b]) - np.sum(expected[b]))
                         / np.sqrt(np.sum(expected[b] ** 2) / est.averages) for b in bands])

    model = sampled(f)
    excess = [np.sum(model[b] - 1) for b in bands]
    assert excess[0] > 3 * excess[1], "the check needs a lopsided spectrum"
    assert np.all(np.abs(z_scores(model)) < 5), z_scores(model)
    # The mirror image (what a missing or doubled conjugation gives) is rejected.
    assert np.any(np.abs(z_scores(sampled(-f))) > 5), z_scores(sampled(-f))


# -- the repository stands alone --------------------------------------------------

# Every text a reader or a developer meets: the docs, the two guides, the
# package (code and bundled data), the tests with their data, the example
# scenarios and the build files.
def standalone_texts():
    """Path relative to the repository → text, for every file that may cite another."""
    paths = [*DOCS.glob("*.md"), REPO / "README.md", REPO / "DEVELOPERS.md",
             REPO / "pyproject.toml", REPO / "Makefile"]
    for folder in ("simulator", "tests", "scenarios"):
        paths += [p for p in (REPO / folder).rglob("*") if p.suffix in (".py", ".toml", ".md")]
    return {p.relative_to(REPO).as_posix(): p.read_text(encoding="utf-8")
            for p in sorted(set(paths)) if "__pycache__" not in p.parts}


# A file path with a top-level folder of the repository, e.g. docs/records.md,
# tests/test_records.py, scenarios/membrane_4k.toml, simulator/data/demo.toml.
# Globs (tests/bad_scenarios/*.toml) stop the match and are not paths.
CITED_PATH = re.compile(
    r"(?<![\w/.-])((?:docs|tests|scenarios|simulator)/[\w./-]*\w\.(?:md|py|toml))\b")
# A bare Markdown name (physics.md, DEVELOPERS.md): at the top level or in docs/.
CITED_MD = re.compile(r"(?<![\w/.-])([\w-]+\.md)\b")
# A bare test-file name (test_records.py): in tests/.
CITED_TEST = re.compile(r"(?<![\w/.-])(test_\w+\.py)\b")
# docs/architecture.md is being written on another branch (the design rules
# "one linear model for spectra, steady state and records", "a scenario is a
# frozen value", the record file layout, "every stochastic function takes a
# seed"); docs cite it already. Until that branch is merged it may be missing,
# and this single name is let through; once it exists it is checked like any
# other file, and this allowance can go.
NOT_YET_MERGED = {"docs/architecture.md"}

# Files that were never part of the repository: notes kept beside it. Their
# names are assembled here so that this test file does not cite them itself.
OUTSIDE_NOTES = re.compile(r"\b(?:" + "|".join(("REFERENCES", "DESIGN", "STYLE")) + r")\.md\b",
                           re.IGNORECASE)
# An issue number: the word issue, ticket, bug, pull request or PR followed by
# a number (with or without "#"), or "#" and a number alone. CSS colours (a
# three-digit colour followed by ";") and hex colours are not matched; the
# planted lines of the self-test below show each form.
ISSUE_NUMBER = re.compile(
    r"\b(?:issue|ticket|bug|pull request|PR)s?\s*(?:no\.?\s*)?#?\s*\d+"
    r"|(?<![\w&#])#\d+\b(?![\w;])", re.IGNORECASE)


def missing_citations(texts):
    """``file: cited path`` for every cited file that is not in the repository."""
    problems = []
    for name, text in texts.items():
        cited = {m for m in CITED_PATH.findall(text) if m not in NOT_YET_MERGED}
        missing = [m for m in cited if not (REPO / m).exists()]
        missing += [m for m in set(CITED_MD.findall(text))
                    if not (REPO / m).exists() and not (DOCS / m).exists()
                    and f"docs/{m}" not in NOT_YET_MERGED]
        missing += [m for m in set(CITED_TEST.findall(text)) if not (REPO / "tests" / m).exists()]
        problems += [f"{name}: cites {m}, which is not in the repository" for m in sorted(missing)]
    return problems


def outside_citations(texts):
    """``file:line: text`` for every mention of an outside note or an issue number."""
    problems = []
    for name, text in texts.items():
        for number, line in enumerate(text.splitlines(), 1):
            for pattern in (OUTSIDE_NOTES, ISSUE_NUMBER):
                problems += [f"{name}:{number}: {m.group(0)!r} in {line.strip()!r}"
                             for m in pattern.finditer(line)]
    return problems


def test_every_cited_file_is_in_the_repository():
    texts = standalone_texts()
    assert len(texts) > 100 and "docs/validation.md" in texts and "tests/test_docs.py" in texts
    problems = missing_citations(texts)
    assert not problems, ("cited files that do not exist (cite a published source or a "
                          "doc of this repository instead):\n" + "\n".join(problems))


def test_nothing_cites_notes_outside_the_repository_or_issue_numbers():
    problems = outside_citations(standalone_texts())
    assert not problems, ("the repository must stand alone: cite the published source, "
                          "a doc of this repository, or state the requirement itself:\n"
                          + "\n".join(problems))


def test_the_standalone_checks_can_fail():
    """Planted bad lines are caught; the allowed forms are not."""
    # Assembled at run time, so that this file neither cites nor mentions them.
    outside, md, py = "RE" + "FERENCES" + ".md", "nowhere" + ".md", "test_nowhere" + ".py"
    planted = {
        "planted doc": f"See {outside}, docs/{md}, gone{md} and {py}.",
        "planted test": "# required by iss" + "ue 4; see #" + "12, Issue #" + "3, PR" + " 7",
    }
    missing = missing_citations(planted)
    assert len(missing) == 4, missing  # the note, the two missing docs, the test file
    assert len(outside_citations(planted)) == 5, outside_citations(planted)
    fine = {"fine doc": "docs/physics.md §12, physics.md, docs/architecture.md, "
                            "tests/test_records.py, test_docs.py, tests/bad_scenarios/*.toml, "
                            "color: #222; #4c9f70"}
    assert missing_citations(fine) == [] and outside_citations(fine) == []

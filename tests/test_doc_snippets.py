"""Command output shown in the docs equals what the command prints now.

The snippets are marked and compared as tests/doc_snippets.py describes (words
exactly, numbers to a relative 1e-3); `.venv/bin/python tests/doc_snippets.py
--update` refreshes them after a deliberate change of the output.
"""

import pytest
from doc_snippets import DOCUMENTS, REPO, differences, excerpt, run, snippets

CASES = [s for name in DOCUMENTS for s in snippets(REPO / name)]


def test_the_tutorial_shows_checked_output():
    """The check is not vacuous: the tutorial's feasibility block is marked."""
    tutorial = [s for s in CASES if s.path.name == "tutorial-feasibility.md"]
    assert any(s.command.startswith("noisechain inspect") for s in tutorial)
    assert all(s.shown.strip() for s in CASES), "an empty snippet: run --update"


@pytest.mark.parametrize("snippet", CASES,
                         ids=[f"{s.path.name}:{s.command}:{s.start}" for s in CASES])
def test_shown_output_is_printed_output(snippet):
    fresh = excerpt(snippet, run(snippet.command))
    problems = differences(snippet.shown, fresh)
    assert not problems, (f"{snippet.path.name}: output of {snippet.command!r} changed; "
                          "refresh with `.venv/bin/python tests/doc_snippets.py --update` "
                          "and review the diff:\n" + "\n".join(problems))


def test_comparison_allows_the_last_digit_and_nothing_more():
    shown = "  occupation error after 1 s       0.0346  (exact model)\n"
    assert not differences(shown, shown.replace("0.0346", "0.03461"))
    assert differences(shown, shown.replace("0.0346", "0.0347"))
    assert differences(shown, shown.replace("exact", "linear"))
    assert differences(shown, shown + "one more line\n")

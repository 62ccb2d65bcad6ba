"""Output shown in the docs is the output the commands print.

A doc shows a command's output under a marker line of our own design, an HTML
comment (invisible in rendered Markdown) directly above a fenced block:

    <!-- shown-output: noisechain inspect scenarios/membrane_4k.toml
         from "feasibility, mode drum-11" lines 3 -->
    ```text
    ...the lines the command prints...
    ```

``from "TEXT"`` starts the excerpt at the first output line that begins with
TEXT (after its indentation), ``lines N`` keeps N lines; without them the
whole output is shown. ``noisechain`` runs as ``python -m simulator`` from the
repository root. The test (tests/test_doc_snippets.py) compares the shown
lines with fresh output: the words exactly, the numbers to a relative
NUMBER_TOLERANCE (the commands are deterministic; the last printed digit may
move with the linear-algebra library). After a change of what a command
prints, refresh every snippet with

    .venv/bin/python tests/doc_snippets.py --update

and review the diff.
"""

import dataclasses
import math
import re
import shlex
import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
DOCUMENTS = ("docs/tutorial-feasibility.md", "README.md")
NUMBER_TOLERANCE = 1e-3  # relative; the snippets print 4 to 6 significant digits
MARKER = re.compile(r"<!-- shown-output: (?P<spec>.*?)-->\n```text\n(?P<body>.*?)```\n",
                    re.DOTALL)
SPEC = re.compile(r'^(?P<command>.*?)(?:\s+from\s+"(?P<start>[^"]*)")?(?:\s+lines\s+'
                  r'(?P<lines>\d+))?\s*$', re.DOTALL)
NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


@dataclasses.dataclass(frozen=True)
class Snippet:
    """One marked block: where it is, the command and excerpt it claims, its text."""

    path: Path
    span: tuple  # character span of the fenced body in the document
    command: str
    start: str | None
    lines: int | None
    shown: str


def snippets(path):
    """The marked snippets of one document, in order."""
    text = Path(path).read_text()
    found = []
    for match in MARKER.finditer(text):
        spec = SPEC.match(" ".join(match["spec"].split()))
        found.append(Snippet(path=Path(path), span=match.span("body"),
                             command=spec["command"], start=spec["start"],
                             lines=int(spec["lines"]) if spec["lines"] else None,
                             shown=match["body"]))
    return found


def run(command):
    """Output of a ``noisechain ...`` command, run from the repository root."""
    words = shlex.split(command)
    if words[0] != "noisechain":
        raise ValueError(f"shown-output command {command!r}: expected 'noisechain ...'")
    done = subprocess.run([sys.executable, "-m", "simulator", *words[1:]], cwd=REPO,
                          capture_output=True, text=True, timeout=300)
    if done.returncode != 0:
        raise RuntimeError(f"{command!r} failed with status {done.returncode}: "
                           f"{done.stderr[-2000:]}")
    return done.stdout


def excerpt(snippet, output):
    """The lines of ``output`` the snippet claims to show, newline-terminated."""
    lines = output.splitlines()
    first = 0
    if snippet.start is not None:
        first = next((i for i, line in enumerate(lines)
                      if line.lstrip().startswith(snippet.start)), None)
        if first is None:
            raise LookupError(f"{snippet.path.name}: no line of {snippet.command!r} "
                              f"starts with {snippet.start!r}")
    last = len(lines) if snippet.lines is None else first + snippet.lines
    return "".join(line.rstrip() + "\n" for line in lines[first:last])


def differences(shown, fresh, tolerance=NUMBER_TOLERANCE):
    """Lines whose words differ or whose numbers differ by more than ``tolerance``."""
    out = []
    a, b = shown.splitlines(), fresh.splitlines()
    if len(a) != len(b):
        out.append(f"{len(a)} lines shown, {len(b)} printed")
    for left, right in zip(a, b, strict=False):
        words_l, words_r = NUMBER.sub("#", left).split(), NUMBER.sub("#", right).split()
        numbers_l = [float(x) for x in NUMBER.findall(left)]
        numbers_r = [float(x) for x in NUMBER.findall(right)]
        if words_l != words_r or len(numbers_l) != len(numbers_r) or not all(
                math.isclose(x, y, rel_tol=tolerance, abs_tol=0)
                for x, y in zip(numbers_l, numbers_r, strict=True)):
            out.append(f"shown:   {left}\nprinted: {right}")
    return out


def update(path):
    """Rewrite every snippet of ``path`` with fresh output; returns how many changed."""
    path = Path(path)
    text = path.read_text()
    changed = 0
    for snippet in reversed(snippets(path)):
        fresh = excerpt(snippet, run(snippet.command))
        if fresh != snippet.shown:
            changed += 1
            text = text[:snippet.span[0]] + fresh + text[snippet.span[1]:]
    path.write_text(text)
    return changed


def main(argv):
    if argv[1:] != ["--update"]:
        print(__doc__)
        return 2
    for name in DOCUMENTS:
        print(f"{name}: {update(REPO / name)} snippet(s) refreshed")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))

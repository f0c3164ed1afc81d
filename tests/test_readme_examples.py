"""The README's ``sdrx`` examples run as written, in order, after ``make demo``, and again.

Every example line of the README's code blocks is checked against the rules that make it rerunnable in a
fresh clone (it parses as the command line would parse it; it writes only under ``demo_out/``, which git
ignores, and carries ``--force``; what it reads is in the repository, made by the demo or by an earlier
example). The quick ones are then run twice, in order, in a scratch folder laid out as the repository is,
with a short capture synthesized from the demo's scenario in place of the demo's 1.6 s one.
"""

from __future__ import annotations

import re
import shlex
import shutil
from pathlib import Path

import click
import pytest

from helpers_cli import run
from sdrx.cli import cli

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
DEMO_SCRIPT = ROOT / "demo_signals" / "demo.sh"
SCRATCH = "demo_out"
#: options whose value is a file or folder the command writes
OUTPUT_OPTIONS = ("-o", "--output", "--summary", "--junit", "--failures", "--spectrogram")
#: the examples run here (a few seconds in all on a short capture); the others take tens of seconds
QUICK = ("info", "synth", "receive", "plan")


def _is_synopsis(line: str) -> bool:
    """A usage line (optional parts in brackets, upper-case placeholders), not an example."""
    return "[" in line or re.search(r"\b[A-Z][A-Z_]{2,}\b", line) is not None


def readme_examples() -> list:
    """The README's example command lines (code-block lines starting ``sdrx``), in order."""
    found, inside = [], False
    for line in README.read_text(encoding="utf-8").splitlines():
        if line.startswith("```"):
            inside = not inside
        elif inside and line.startswith("sdrx ") and not _is_synopsis(line):
            found.append(line)
    return found


def _command(argv: list):
    """The click command an argument list runs and the arguments left for it."""
    cmd, rest = cli, list(argv)
    while isinstance(cmd, click.Group):
        cmd = cmd.get_command(None, rest[0])
        assert cmd is not None, f"sdrx {' '.join(argv)}: no such command"
        rest = rest[1:]
    return cmd, rest


def _outputs(argv: list) -> list:
    return [argv[i + 1] for i, a in enumerate(argv[:-1]) if a in OUTPUT_OPTIONS]


def _inputs(argv: list) -> list:
    """Path-like arguments that are not outputs (they hold a ``/`` or name a capture or cases file)."""
    outs = set(_outputs(argv))
    return [a for a in argv if not a.startswith("-") and a not in outs and ("/" in a)]


EXAMPLES = readme_examples()


def test_the_readme_has_its_examples():
    # one per command at least, so that the checks below cannot pass on an empty list
    commands = {shlex.split(line)[1] for line in EXAMPLES}
    assert commands == {"info", "synth", "receive", "report", "plan", "compare", "band", "refs"}
    assert len(EXAMPLES) >= 10


def test_demo_out_is_ignored_by_git():
    assert f"/{SCRATCH}/" in (ROOT / ".gitignore").read_text(encoding="utf-8").splitlines()


@pytest.mark.parametrize("line", EXAMPLES)
def test_example_parses_as_the_command_line_does(line):
    cmd, rest = _command(shlex.split(line)[1:])
    # resilient parsing: options and values are checked, callbacks such as --list-chains do not run
    ctx = cmd.make_context(cmd.name, rest, resilient_parsing=True)
    assert ctx.params


def test_examples_write_under_demo_out_with_force_and_read_what_exists():
    demo = DEMO_SCRIPT.read_text(encoding="utf-8")
    written = set()
    for line in EXAMPLES:
        argv = shlex.split(line)[1:]
        outs = _outputs(argv)
        for out in outs:
            assert Path(out).parts[0] == SCRATCH and ".." not in Path(out).parts, f"{line}: writes {out}"
        if outs:
            assert "--force" in argv, f"{line}: a rerun would refuse (no --force)"
        for src in _inputs(argv):
            if Path(src).parts[0] == SCRATCH:
                name = src[len(SCRATCH) + 1:]
                assert f'"$OUT/{name}"' in demo or src in written, f"{line}: nothing makes {src} before it"
            else:
                assert (ROOT / src).exists(), f"{line}: {src} is not in the repository"
        written.update(outs)


@pytest.fixture(scope="module")
def scratch_clone(tmp_path_factory):
    """A folder laid out as the repository after ``make demo``, with a 0.3 s version of the demo capture."""
    from sdrx.synth import synthesize

    root = tmp_path_factory.mktemp("clone")
    (root / "demo_signals").mkdir()
    (root / SCRATCH).mkdir()
    scenario = (ROOT / "demo_signals" / "coast.toml").read_text(encoding="utf-8")
    short, n = re.subn(r"(?m)^seconds = 1\.6\b", "seconds = 0.3", scenario)
    assert n == 1
    (root / "demo_signals" / "coast.toml").write_text(short, encoding="utf-8")
    for name in ("no-preselector.toml", "dongle.toml"):
        shutil.copy(ROOT / "demo_signals" / name, root / "demo_signals" / name)
    synthesize(root / "demo_signals" / "coast.toml", root / "demo_signals" / "coast.sigmf-meta")
    return root


def _files(root: Path) -> set:
    return {p.relative_to(root).as_posix() for p in root.rglob("*")}


def test_quick_examples_run_in_order_and_again(scratch_clone, monkeypatch, capsys):
    monkeypatch.chdir(scratch_clone)
    before = _files(scratch_clone)
    quick = [line for line in EXAMPLES if shlex.split(line)[1] in QUICK
             and not any(Path(a).parts[0] == SCRATCH for a in _inputs(shlex.split(line)[1:]))]
    assert {shlex.split(line)[1] for line in quick} == set(QUICK)
    for attempt in ("first run", "rerun"):
        for line in quick:
            rc, _out, err = run(shlex.split(line)[1:], capsys)
            assert rc == 0, f"{attempt}: {line}\n{err}"
    new = {f for f in _files(scratch_clone) - before if Path(f).parts[0] != SCRATCH}
    assert not new, f"the examples wrote outside {SCRATCH}/: {sorted(new)}"

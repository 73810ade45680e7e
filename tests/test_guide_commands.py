"""Every `fillstress` command in the shell code blocks of docs/guide.md and README.md runs.

The commands are taken from the documents as written and run through
``fillstress.cli.main`` in one temporary folder, in document order (README first, then the
guide), so a later command finds the results folder an earlier one wrote.  The files they
name are prepared there: ``site.toml`` and ``my_site.toml`` are copies of the sample site
``stockpile_yard`` (whose coordinates the README's ``point`` command uses), ``variants.toml``
an invented variants file.  Two changes keep the test headless and short, and no others:
``--no-report`` is added to ``run``, ``batch`` and ``example`` (they accept it; ``report``
itself is still run where a document shows it), and ``view`` renders offscreen with
``--png`` when the document gives no ``--png``.  A command shown in both documents runs
once, since a second identical run would rightly refuse the existing results folder.
"""
from __future__ import annotations

import contextlib
import io
import re
import shlex
import shutil
from pathlib import Path

import pytest

from fillstress.cli import main
from fillstress.examples import example_site, list_examples

ROOT = Path(__file__).resolve().parents[1]
DOCUMENTS = [ROOT / "README.md", ROOT / "docs" / "guide.md"]
SHELL_LANGUAGES = {"", "bash", "sh", "shell", "console"}
SAMPLE_FOR_SITE_FILES = "stockpile_yard"
SITE_FILE_NAMES = ("site.toml", "my_site.toml")
# Invented variants for the batch command: heavier fill and a higher water table.
VARIANTS_TOML = """\
[[variants]]
name = "heavier_fill"
unit_weight_factor = 1.10

[[variants]]
name = "high_water"
water_table = 1.0
"""
NO_REPORT = {"run", "batch", "example"}


def shell_lines(markdown: str) -> list[str]:
    """Lines inside fenced code blocks whose language is a shell (or unstated)."""
    lines, language = [], None
    for line in markdown.splitlines():
        fence = re.match(r"^\s*```\s*(\S*)", line)
        if fence:
            language = fence.group(1).lower() if language is None else None
            continue
        if language is not None and language in SHELL_LANGUAGES:
            lines.append(line)
    return lines


def fillstress_commands(markdown: str) -> list[str]:
    """Each `fillstress ...` command of the shell blocks, comments dropped; a line joined
    with && contributes its fillstress parts."""
    commands = []
    for line in shell_lines(markdown):
        for part in line.split("&&"):
            words = shlex.split(part, comments=True)
            if words and words[0] == "fillstress":
                commands.append(shlex.join(words))
    return commands


def headless(command: str) -> list[str]:
    """The argv passed to cli.main: the command's words after `fillstress`, with
    --no-report for runs and --png for view (see the module docstring)."""
    argv = shlex.split(command)[1:]
    sub = argv[0] if argv else ""
    if sub in NO_REPORT and "--no-report" not in argv:
        argv.append("--no-report")
    if sub == "view" and "--png" not in argv and "--html" not in argv:
        argv += ["--png", "view.png"]
    return argv


def _document_commands() -> list[tuple[str, str]]:
    found = []
    for doc in DOCUMENTS:
        for command in fillstress_commands(doc.read_text(encoding="utf-8")):
            found.append((doc.relative_to(ROOT).as_posix(), command))
    return found


COMMANDS = _document_commands()


def _prepare(folder: Path) -> None:
    sample = example_site(SAMPLE_FOR_SITE_FILES).parent
    for item in sample.iterdir():
        if item.is_file():
            shutil.copy2(item, folder / item.name)
    for name in SITE_FILE_NAMES:
        shutil.copy2(sample / "site.toml", folder / name)
    (folder / "variants.toml").write_text(VARIANTS_TOML, encoding="utf-8")
    # the guide's monitoring walk-through copies the preload sample (with its readings)
    shutil.copytree(example_site("preload_surcharge").parent, folder / "preload")


def _run(argv: list[str]) -> tuple[int, str]:
    out = io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(out):
        try:
            code = main(argv)
        except SystemExit as exc:          # --version and --help exit through argparse
            code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 2)
    return code, out.getvalue()


@pytest.fixture(scope="module")
def outcomes(tmp_path_factory):
    """Exit code and output of every distinct command, run once in document order."""
    folder = tmp_path_factory.mktemp("guide")
    _prepare(folder)
    results = {}
    with pytest.MonkeyPatch.context() as mp:
        mp.chdir(folder)
        for _, command in COMMANDS:
            if command not in results:
                results[command] = _run(headless(command))
    return results


def test_each_document_shows_commands():
    for doc in DOCUMENTS:
        assert fillstress_commands(doc.read_text(encoding="utf-8")), f"no commands in {doc}"


@pytest.mark.parametrize("doc, command", COMMANDS, ids=[f"{d}: {c}" for d, c in COMMANDS])
def test_documented_command_succeeds(doc, command, outcomes):
    code, output = outcomes[command]
    assert code == 0, (f"{doc}: `{command}` (run as fillstress {shlex.join(headless(command))}) "
                       f"exited {code}:\n{output[-2000:]}")


def test_sample_sites_named_in_the_guide_exist():
    guide = (ROOT / "docs" / "guide.md").read_text(encoding="utf-8")
    table = re.findall(r"^\| `([A-Za-z0-9_]+)` \|", guide, flags=re.MULTILINE)
    run = [words[2] for _, c in COMMANDS
           if len(words := shlex.split(c)) > 2 and words[1] == "example"]
    named = set(table) | set(run)
    assert table, "the guide's sample-site table was not found"
    bundled = {name for name, _ in list_examples()}
    assert named <= bundled, f"named in the documents but not bundled: {sorted(named - bundled)}"
    for name in named:
        assert example_site(name).is_file()


def test_extraction_rules():
    text = "\n".join(["Text `fillstress inline` is not a block.", "```bash",
                      "pip install x && fillstress example one   # comment",
                      "fillstress run 'my site.toml' -o out", "python -m pytest", "```",
                      "```python", "fillstress = 1", "```"])
    assert fillstress_commands(text) == ["fillstress example one",
                                         "fillstress run 'my site.toml' -o out"]
    assert headless("fillstress run s.toml -o r") == ["run", "s.toml", "-o", "r", "--no-report"]
    assert headless("fillstress view r") == ["view", "r", "--png", "view.png"]
    assert headless("fillstress report r") == ["report", "r"]

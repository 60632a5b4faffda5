"""The README's examples run as written: every ```python block, and every ``exosieve`` command
of the ```bash blocks, each block in a fresh directory holding ``cases.csv`` (a copy of
``data/case_table_template.csv``, as the README says). A block that reads ``sweep.h5`` without
writing it finds the file the README's ``exosieve sweep cases.csv -o sweep.h5`` writes.
Not run: the set-up commands (``bash .ci/...``) and the line that needs a Dask scheduler."""

from __future__ import annotations

import re
import shlex
import shutil
from pathlib import Path

import pytest

from exosieve.cli import main

ROOT = Path(__file__).resolve().parents[2]
README = ROOT / "README.md"
TEMPLATE = ROOT / "data" / "case_table_template.csv"
FENCE = re.compile(r"^```(\w*)\n(.*?)^```", re.MULTILINE | re.DOTALL)


def blocks(language: str) -> list:
    """The README's fenced blocks in `language`, each with its line number as test id."""
    text = README.read_text(encoding="utf-8")
    found = []
    for match in FENCE.finditer(text):
        if match.group(1) == language:
            line = text.count("\n", 0, match.start()) + 2  # the block's first line
            found.append(pytest.param(match.group(2), line, id=f"README.md:{line}"))
    return found


def test_the_readme_has_the_examples_this_file_runs():
    languages = [m.group(1) for m in FENCE.finditer(README.read_text(encoding="utf-8"))]
    assert set(languages) == {"python", "bash"}, languages  # a new kind would go unrun
    assert len(blocks("python")) >= 3 and len(blocks("bash")) >= 2


@pytest.fixture
def workdir(tmp_path, monkeypatch):
    shutil.copy(TEMPLATE, tmp_path / "cases.csv")
    monkeypatch.chdir(tmp_path)
    return tmp_path


@pytest.mark.parametrize(("code", "line"), blocks("python"))
def test_python_block_runs(code, line, workdir):
    if "sweep.h5" in code and not re.search(r"""output=["']sweep\.h5""", code):
        assert main(["sweep", "cases.csv", "-o", "sweep.h5", "--samples", "20"]) == 0
    exec(compile(code, f"{README}:{line}", "exec"), {"__name__": "__readme__"})
    for written in re.findall(r"""to_hdf5\(["']([^"']+)["']\)""", code):
        assert (workdir / written).stat().st_size > 0, written


def commands(code: str) -> tuple[list[list[str]], list[str]]:
    """The block's ``exosieve`` commands (arguments after the program name) and the commands
    not run; anything else fails, so that every README command is either run or named here."""
    run, skipped = [], []
    for text in code.splitlines():
        for part in text.split("&&"):
            words = shlex.split(part, comments=True)
            if not words:
                continue
            if words[0] == "bash" and words[1].startswith(".ci/"):
                skipped.append(part.strip())  # set-up: installs packages, builds the package
            elif Path(words[0]).name == "exosieve" and "--scheduler" in words:
                skipped.append(part.strip())  # needs a running Dask scheduler
            elif Path(words[0]).name == "exosieve":
                run.append(words[1:])
            else:
                pytest.fail(f"README command neither run nor known to be set-up: {part!r}")
    return run, skipped


@pytest.mark.parametrize(("code", "line"), blocks("bash"))
def test_bash_block_exosieve_commands_run(code, line, workdir, capsys):
    run, _ = commands(code)
    assert run, f"README.md:{line}: no exosieve command to run"
    for args in run:
        try:
            status = main(args)
        except SystemExit as stop:  # --version and --help exit through argparse
            status = stop.code
        printed = capsys.readouterr()
        assert status == 0, (args, printed.err)
        assert printed.out.strip(), args  # every command says what it did
        for option, value in zip(args, args[1:], strict=False):
            if option in ("-o", "--output"):
                assert (workdir / value).stat().st_size > 0, args

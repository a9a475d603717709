"""Every command the README documents runs, and its Python example works."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest
from typer.testing import CliRunner

from decide.cli import app

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _blocks(lang: str) -> list[str]:
    return re.findall(rf"```{lang}\n(.*?)```", README, flags=re.S)


def _commands() -> list[str]:
    found = []
    for block in _blocks("sh"):
        for line in block.splitlines():
            line = line.strip()
            if not line or line.startswith("#"):
                continue
            # "pip install ... && decide ..." runs the part after the install
            for part in line.split("&&"):
                part = part.strip()
                if part.startswith("decide "):
                    found.append(part)
    return found


def test_readme_has_exactly_two_setup_commands() -> None:
    setup = README.split("## Set up", 1)[1].split("##", 1)[0]
    lines = [x for x in _blocks("sh")[0].splitlines() if x.strip()]
    assert lines[0] in setup and len(lines) == 2
    assert "decide compare scenarios/" in lines[0]
    assert lines[1].endswith("python -m pytest")


@pytest.mark.parametrize("command", _commands())
def test_readme_command_runs(command: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("COLUMNS", "100")
    args = shlex.split(command)[1:]
    args = [str(ROOT / a) if a.startswith("scenarios/") else a for a in args]
    if args[0] == "new":
        args[1] = str(tmp_path / args[1])
    monkeypatch.chdir(tmp_path)
    result = CliRunner().invoke(app, args)
    assert result.exit_code == 0, result.output
    assert "Traceback" not in result.output
    if "--output" in args:
        assert (tmp_path / args[args.index("--output") + 1]).read_text(encoding="utf-8").startswith("# ")


def test_readme_python_example_runs(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    monkeypatch.chdir(ROOT)
    (code,) = _blocks("python")
    exec(compile(code, "README.md", "exec"), {})
    out = capsys.readouterr().out
    assert "Loss-optimal" in out and "Conventional science" in out

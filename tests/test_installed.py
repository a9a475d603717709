"""What a user installs: the package under test, its version, its bundled files, its entry points.

``.ci/run`` installs the package into a fresh virtual environment and runs the
suite from the checkout with ``CI=true``; the suite must then test the
installed copy, not the checkout beside it (``tests/conftest.py`` sees to
that, and the first test here fails if it did not).  The checks on the
installed files run where ``decide`` was installed from a wheel; the sdist
check builds one, and only under CI.
"""

from __future__ import annotations

import os
import re
import subprocess
import sys
import tarfile
import tomllib
import zipfile
from importlib import metadata
from pathlib import Path

import pytest
from typer.testing import CliRunner

import decide
from decide.cli import app
from decide.errors import DecideError
from decide.scenario import (
    BUILTIN_ORDER,
    builtin_policy_dir,
    bundled_dir,
    example_names,
    example_path,
    example_text,
    load_scenario,
)
from decide.scenario.bundled import first_bundled_dir

REPO = Path(__file__).resolve().parents[1]
PACKAGE = Path(decide.__file__).resolve().parent
IN_CI = os.environ.get("CI") == "true"  # as .ci/run (and most CI services) set it
BUILDS = bool(os.environ.get("CI"))  # the builds run where CI is set at all
#: decide was installed from a wheel (not imported from a checkout or an editable install).
FROM_WHEEL = (PACKAGE / "_policies").is_dir()
PYPROJECT = tomllib.loads((REPO / "pyproject.toml").read_text(encoding="utf-8"))
SCENARIO_FILES = sorted((REPO / "scenarios").glob("*.toml"))


def child_env() -> dict[str, str]:
    """The environment for a child Python that imports the same ``decide`` as these tests."""
    env = dict(os.environ, COLUMNS="100")
    env["PYTHONPATH"] = os.pathsep.join([str(PACKAGE.parent), *filter(None, [env.get("PYTHONPATH")])])
    return env


@pytest.mark.skipif(not IN_CI, reason="CI=true only: .ci/run tests an installed copy")
def test_ci_tests_the_installed_package_not_the_checkout() -> None:
    assert not PACKAGE.is_relative_to(REPO), f"the checkout's decide was tested: {PACKAGE}"
    assert FROM_WHEEL, f"decide at {PACKAGE} was not installed from a wheel"


def test_this_process_tests_the_decide_the_first_one_found() -> None:
    # pytest-xdist workers put the working folder first on sys.path; conftest.py undoes that.
    assert str(PACKAGE.parent) == os.environ["DECIDE_TESTS_IMPORT_FROM"]


def test_version_is_written_once_in_pyproject() -> None:
    assert decide.__version__ == metadata.version("decide") == PYPROJECT["project"]["version"]
    source = (PACKAGE / "__init__.py").read_text(encoding="utf-8")
    assert PYPROJECT["project"]["version"] not in source


def test_version_option() -> None:
    result = CliRunner().invoke(app, ["--version"])
    assert (result.exit_code, result.stdout) == (0, f"decide {PYPROJECT['project']['version']}\n")


def test_package_says_it_is_typed_and_licensed() -> None:
    assert (PACKAGE / "py.typed").is_file()
    license_text = (REPO / "LICENSE").read_text(encoding="utf-8")
    assert license_text.startswith("MIT License\n")
    assert PYPROJECT["project"]["license"] == {"text": "MIT"}
    assert "LICENSE" in PYPROJECT["tool"]["hatch"]["build"]["targets"]["sdist"]["include"]


@pytest.mark.skipif(not FROM_WHEEL, reason="needs decide installed from a wheel (.ci/run does that)")
def test_installed_copy_carries_license_and_bundled_files() -> None:
    assert metadata.metadata("decide")["License"] == "MIT"
    licenses = [f for f in metadata.files("decide") or [] if f.name == "LICENSE"]
    assert len(licenses) == 1
    assert licenses[0].read_text(encoding="utf-8") == (REPO / "LICENSE").read_text(encoding="utf-8")
    assert builtin_policy_dir() == PACKAGE / "_policies"
    assert bundled_dir("scenarios") == PACKAGE / "_scenarios"
    assert {p.stem for p in builtin_policy_dir().glob("*.toml")} == set(BUILTIN_ORDER)


def test_bundled_examples_are_the_checkouts_scenarios() -> None:
    assert example_names() == [p.stem for p in SCENARIO_FILES]
    for path in SCENARIO_FILES:
        assert example_text(path.stem) == path.read_text(encoding="utf-8")
        assert example_path(path.stem).name == path.name
    listed = ", ".join(p.stem for p in SCENARIO_FILES)
    with pytest.raises(DecideError, match=re.escape(f"example must be one of {listed}, but got 'no-such-example'")):
        example_text("no-such-example")


def test_bundled_folder_lookup_prefers_the_installed_copy(tmp_path: Path) -> None:
    packaged, checkout = tmp_path / "pkg" / "_scenarios", tmp_path / "scenarios"
    checkout.mkdir()
    assert first_bundled_dir(packaged, checkout, "scenarios") == checkout
    packaged.mkdir(parents=True)
    assert first_bundled_dir(packaged, checkout, "scenarios") == packaged
    with pytest.raises(DecideError, match="the bundled scenarios are missing"):
        first_bundled_dir(tmp_path / "a", tmp_path / "b", "scenarios")


@pytest.mark.parametrize("path", SCENARIO_FILES, ids=lambda p: p.stem)
def test_new_example_writes_the_bundled_scenario(path: Path, tmp_path: Path) -> None:
    target = tmp_path / "mine.toml"
    result = CliRunner().invoke(app, ["new", str(target), "--example", path.stem])
    assert result.exit_code == 0, result.stderr
    assert target.read_bytes() == path.read_bytes()
    assert load_scenario(target).problem == load_scenario(path).problem
    assert "INVENTED DEMONSTRATION DATA" in target.read_text(encoding="utf-8")


def test_new_with_an_unknown_example_lists_the_names(tmp_path: Path) -> None:
    result = CliRunner().invoke(app, ["new", str(tmp_path / "x.toml"), "--example", "nope"])
    assert result.exit_code == 2 and result.stdout == ""
    assert result.stderr == (
        f"decide new: --example must be one of {', '.join(p.stem for p in SCENARIO_FILES)}, but got 'nope'\n"
    )
    assert not (tmp_path / "x.toml").exists()
    helped = "".join(CliRunner().invoke(app, ["new", "--help"]).stdout.split())  # unwrapped
    assert all(p.stem in helped for p in SCENARIO_FILES)


def test_python_dash_m_writes_an_example_away_from_the_checkout(tmp_path: Path) -> None:
    # What an installed user does first: no checkout at hand, the examples come from the package;
    # python -m decide is the same command line as decide.
    child = subprocess.run(
        [sys.executable, "-m", "decide", "new", "start.toml", "--example", "solvent-cohort"],
        cwd=tmp_path,
        env=child_env(),
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert (child.returncode, child.stdout) == (0, ""), child.stderr
    assert child.stderr == "wrote start.toml; edit it, then run: decide compare start.toml\n"
    assert (tmp_path / "start.toml").read_bytes() == (REPO / "scenarios" / "solvent-cohort.toml").read_bytes()


@pytest.mark.skipif(not BUILDS, reason="builds the sdist and a wheel from it; runs where CI is set")
def test_sdist_builds_a_wheel_with_everything(tmp_path: Path) -> None:
    # What a user installing from the sdist gets: build it as pyproject says,
    # unpack it, and build the wheel from the unpacked tree.
    sdist_builder = pytest.importorskip("hatchling.builders.sdist")
    wheel_builder = pytest.importorskip("hatchling.builders.wheel")
    (sdist,) = sdist_builder.SdistBuilder(str(REPO)).build(directory=str(tmp_path), versions=["standard"])
    with tarfile.open(sdist) as tar:
        if hasattr(tarfile, "data_filter"):  # Python 3.11.4 and later
            tar.extractall(tmp_path / "src", filter="data")
        else:
            tar.extractall(tmp_path / "src")  # our own freshly built archive
    (root,) = (tmp_path / "src").iterdir()
    for name in ("LICENSE", "README.md", ".ci/run", "scenarios/solvent-cohort.toml", "policies/loss-optimal.toml"):
        assert (root / name).is_file(), name
    (wheel,) = wheel_builder.WheelBuilder(str(root)).build(directory=str(tmp_path / "dist"), versions=["standard"])
    with zipfile.ZipFile(wheel) as z:
        names = set(z.namelist())
    version = PYPROJECT["project"]["version"]
    assert {f"decide/_scenarios/{p.name}" for p in SCENARIO_FILES} <= names
    assert {f"decide/_policies/{n}.toml" for n in BUILTIN_ORDER} <= names
    assert {"decide/py.typed", "decide/__main__.py", f"decide-{version}.dist-info/licenses/LICENSE"} <= names
    assert not any(n.startswith(("scenarios/", "policies/", "tests/")) for n in names)

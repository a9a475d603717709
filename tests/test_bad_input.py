"""Bad input of every kind: the command line, scenario and policy files, the Python API.

The catalogue below is what a hostile user tries: values out of range, tiny
and huge floats, integers with hundreds of digits, NaN and infinities, deep
TOML, settings a design cannot use, inputs that would build enormous exact
grids.  Every command-line case runs in a child process with its address
space limited to 2 GB and a timeout, and must end cleanly: the expected exit
status, exactly one line on stderr, no traceback, and no NaN or infinity
printed as a number.  Every API case must raise a :class:`DecideError` that
names the argument.  The same invalid values given through the API and
through a scenario file must fail for the same reason.

All scenarios here are invented.
"""

from __future__ import annotations

import io
import math
import os
import re
import resource
import shutil
import signal
import sys
import tempfile
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from decide import DecideError, InfeasibleError, power
from decide.decision.audit import audit
from decide.decision.optimize import compare, optimize
from decide.decision.policies import Policy
from decide.decision.prior import EffectPrior
from decide.decision.problem import Consequences, Constraints, Problem, Study
from decide.engine.solve import solve
from decide.scenario import ScenarioError, load_policies, parse_scenario

MEMORY_LIMIT = 2 << 30  # bytes of address space a case may use
TIMEOUT = 120.0  # seconds before a case counts as hung (a guard, not a speed check)

# A small valid scenario (invented) that the file cases edit.
BASE = """\
title = "Invented bad-input case"
[study]
design = "cohort-risk"
baseline = 0.001
[effect]
ratio = 3.0
[prior]
p_harm = 0.2
[consequences]
missed_hazard = 1.0e8
false_alarm = 1.0e7
per_subject = 100.0
[constraints]
max_n_per_group = 4000
"""

POLICY = """\
title = "Invented test policy"
summary = "An invented policy for the tests."
[alpha]
rule = "fixed"
value = 0.01
[power]
target = 0.9
[size]
rule = "smallest-for-power"
"""


def edit(text: str, old: str, new: str) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


# --------------------------------------------------------------------------
# running the command line in a child with a memory limit


@dataclass(frozen=True)
class Outcome:
    code: int
    stdout: str
    stderr: str


def _child(args: list[str], out: int, err: int) -> None:
    """Run ``decide ARGS`` in a forked child: limited memory, fresh warning filters."""
    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT, MEMORY_LIMIT))
    os.dup2(out, 1)
    os.dup2(err, 2)
    sys.stdout = io.TextIOWrapper(os.fdopen(1, "wb", closefd=False), encoding="utf-8", write_through=True)
    sys.stderr = io.TextIOWrapper(os.fdopen(2, "wb", closefd=False), encoding="utf-8", write_through=True)
    warnings.resetwarnings()  # as in a plain run: warnings print, they do not raise
    warnings.simplefilter("default")
    sys.argv = ["decide", *args]
    code = 0
    try:
        from decide.cli import main

        main()
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    except BaseException:  # what Python itself would print for an uncaught error
        import traceback

        traceback.print_exc()
        code = 1
    sys.stdout.flush()
    sys.stderr.flush()
    os._exit(code)


def run_cli(args: list[str]) -> Outcome:
    """``decide ARGS`` in a forked child with a 2 GB address-space limit and a timeout."""
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        pid = os.fork()
        if pid == 0:  # pragma: no cover - the child
            try:
                _child(args, out.fileno(), err.fileno())
            finally:
                os._exit(70)
        deadline = time.monotonic() + TIMEOUT
        while True:
            done, status = os.waitpid(pid, os.WNOHANG)
            if done:
                break
            if time.monotonic() > deadline:
                os.kill(pid, signal.SIGKILL)
                os.waitpid(pid, 0)
                return Outcome(-1, "", f"timed out after {TIMEOUT:g} s\n")
            time.sleep(0.02)
        code = os.waitstatus_to_exitcode(status)
        out.seek(0)
        err.seek(0)
        return Outcome(code, out.read().decode("utf-8", "replace"), err.read().decode("utf-8", "replace"))


# Numbers that are not numbers, shown as if they were.  An echo of the
# user's own value ("(got inf)", "but got nan") is not a computed number.
_NON_FINITE = re.compile(r"(?<![\w.-])[-+]?(nan|inf)(?![\w])", re.IGNORECASE)
_ECHO = re.compile(r"\bgot [-+]?(nan|inf|infinity)\b", re.IGNORECASE)


def assert_clean(outcome: Outcome, code: int, match: str | None, out: str | None) -> None:
    """The exit status, one line on stderr (none when it succeeds quietly), no traceback."""
    detail = f"exit {outcome.code}\nstdout: {outcome.stdout[-2000:]}\nstderr: {outcome.stderr[-3000:]}"
    assert outcome.code == code, detail
    assert "Traceback" not in outcome.stderr, detail
    assert "Warning" not in outcome.stderr, detail
    if code != 0:
        assert outcome.stderr.endswith("\n") and outcome.stderr.count("\n") == 1, detail
    if match is not None:
        assert re.search(match, outcome.stderr), detail
    if out is not None:
        assert re.search(out, outcome.stdout), detail
    for text in (outcome.stdout, _ECHO.sub("", outcome.stderr)):
        assert not _NON_FINITE.search(text), detail


# --------------------------------------------------------------------------
# the command-line catalogue


@dataclass(frozen=True)
class Case:
    """``decide ARGS``: expected exit status, a pattern for stderr and for stdout.

    ``files`` are written to a temporary folder first; ``{dir}`` in the
    arguments names that folder.
    """

    id: str
    args: tuple[str, ...]
    code: int
    match: str | None = None
    out: str | None = None
    files: dict[str, str] = field(default_factory=dict)


def _solve(*extra: str, design: str = "cohort-risk") -> tuple[str, ...]:
    return ("solve", "--design", design, *extra)


_AUDIT = (
    "audit",
    "--design",
    "cohort-risk",
    "--baseline",
    "8e-4",
    "--alpha",
    "0.05",
    "--effect",
    "3",
    "--p-harm",
    "0.15",
    "--per-subject",
    "250",
)
_SCENARIO = ("{dir}/scenario.toml",)


def _scenario_case(
    id: str, command: str, text: str, code: int, match: str | None = None, out: str | None = None, *extra: str
) -> Case:
    return Case(id, (command, *_SCENARIO, *extra), code, match, out, {"scenario.toml": text})


DIGITS_400 = "9" * 400
DIGITS_4000 = "9" * 4000

CLI_CASES: list[Case] = [
    # ---- inputs that once took all memory or hung
    Case(
        "blowup: power 1-1e-15 exact",
        _solve(
            "--baseline", "8e-4", "--effect", "3", "--alpha", "0.05", "--power", "0.999999999999999", "--test", "exact"
        ),
        2,
        r"--power must be",
    ),
    Case(
        "blowup: allocation 1e-300",
        _solve(
            "--baseline",
            "0.3",
            "--effect",
            "3",
            "--alpha",
            "0.05",
            "--power",
            "0.8",
            "--allocation",
            "1e-300",
            design="case-control",
        ),
        2,
        r"--allocation must be",
    ),
    Case(
        "blowup: SIR 1e10",
        _solve(
            "--baseline", "1e-3", "--effect", "1e10", "--alpha", "0.05", "--n-per-group", "100", design="reference-rate"
        ),
        2,
        r"--effect must be",
    ),
    Case(
        "blowup: allocation 1e300",
        _solve("--baseline", "8e-4", "--effect", "3", "--alpha", "0.05", "--power", "0.8", "--allocation", "1e300"),
        2,
        r"--allocation must be",
    ),
    Case(
        "blowup: alpha 1e-300 exact",
        _solve("--baseline", "8e-4", "--effect", "3", "--alpha", "1e-300", "--power", "0.8", "--test", "exact"),
        2,
        r"--alpha must be",
    ),
    Case(
        "bound: exact grid beyond the limit",
        _solve(
            "--baseline",
            "0.1",
            "--effect",
            "3",
            "--alpha",
            "0.05",
            "--n-per-group",
            "400000",
            "--allocation",
            "0.05",
            "--test",
            "exact",
            design="cohort-rate",
        ),
        1,
        r"^decide solve: cannot be done: the exact test would need .* count pairs, beyond the limit",
    ),
    Case(
        "bound: smallest alpha, exact size scan beyond its budget",
        _solve("--baseline", "8e-4", "--effect", "3", "--alpha", "1e-15", "--power", "0.8", "--test", "exact"),
        1,
        r"^decide solve: cannot be done: --n-per-group: the exact size search would "
        r"go through more than 10,000,000 count pairs",
    ),
    Case(
        "bound: smallest alpha, one-group exact",
        _solve(
            "--baseline",
            "8e-4",
            "--effect",
            "3",
            "--alpha",
            "1e-15",
            "--power",
            "0.8",
            "--years",
            "5",
            "--test",
            "exact",
            "--json",
            design="reference-rate",
        ),
        0,
        None,
        r'"n_per_group": \d+',
    ),
    Case(
        "bound: exact power on a huge study",
        _solve(
            "--baseline", "0.3", "--effect", "1.01", "--alpha", "0.05", "--n-per-group", "1000000000", "--test", "exact"
        ),
        0,
    ),
    Case(
        "bound: tiny person-time",
        _solve(
            "--baseline",
            "1e-12",
            "--effect",
            "2",
            "--alpha",
            "0.05",
            "--power",
            "0.8",
            "--years",
            "1e-3",
            design="reference-rate",
        ),
        1,
        r"cannot be done",
    ),
    Case(
        "bound: largest inputs",
        _solve(
            "--baseline",
            "0.5",
            "--effect",
            "1.9",
            "--alpha",
            "0.5",
            "--n-per-group",
            "1000000000",
            "--allocation",
            "100",
            "--test",
            "exact",
        ),
        0,
    ),
    # ---- tracebacks
    Case(
        "tiny baseline 1e-320",
        _solve("--baseline", "1e-320", "--effect", "3", "--alpha", "0.05", "--power", "0.8"),
        2,
        r"--baseline must be",
    ),
    Case(
        "huge allocation 1e308",
        _solve("--baseline", "0.01", "--effect", "3", "--alpha", "0.05", "--power", "0.8", "--allocation", "1e308"),
        2,
        r"--allocation",
    ),
    Case(
        "400-digit size",
        _solve("--baseline", "0.01", "--effect", "3", "--alpha", "0.05", "--n-per-group", DIGITS_400),
        2,
        r"--n-per-group must be",
    ),
    Case(
        "400-digit cap",
        _solve(
            "--baseline", "0.01", "--effect", "3", "--alpha", "0.05", "--power", "0.8", "--max-n-per-group", DIGITS_400
        ),
        2,
        r"--max-n-per-group must be",
    ),
    Case(
        "SIR 1e15",
        _solve(
            "--baseline", "1e-3", "--effect", "1e15", "--alpha", "0.05", "--n-per-group", "100", design="reference-rate"
        ),
        2,
        r"--effect must be",
    ),
    Case(
        "baseline inf",
        _solve("--baseline", "inf", "--effect", "3", "--alpha", "0.05", "--power", "0.8", design="cohort-rate"),
        2,
        r"--baseline must be",
    ),
    Case(
        "alpha nan",
        _solve("--baseline", "0.01", "--effect", "3", "--alpha", "nan", "--power", "0.8"),
        2,
        r"--alpha must be a number",
    ),
    Case(
        "effect -inf",
        _solve("--baseline", "0.01", "--effect", "-inf", "--alpha", "0.05", "--power", "0.8"),
        2,
        r"--effect must be",
    ),
    Case(
        "years 1e-320",
        _solve(
            "--baseline",
            "1e-3",
            "--effect",
            "3",
            "--alpha",
            "0.05",
            "--power",
            "0.8",
            "--years",
            "1e-320",
            design="cohort-rate",
        ),
        2,
        r"--years must be",
    ),
    Case(
        "years 1e308",
        _solve(
            "--baseline",
            "1e-3",
            "--effect",
            "3",
            "--alpha",
            "0.05",
            "--power",
            "0.8",
            "--years",
            "1e308",
            design="cohort-rate",
        ),
        2,
        r"--years must be",
    ),
    Case(
        "rate 1e308",
        _solve("--baseline", "1e308", "--effect", "3", "--alpha", "0.05", "--power", "0.8", design="cohort-rate"),
        2,
        r"--baseline must be",
    ),
    Case("audit size 1", (*_AUDIT, "--n-per-group", "1"), 0),
    Case("audit alpha 1e-300", (*_AUDIT, "--n-per-group", "2000"), 0),
    Case(
        "audit alpha 1e-300 refused",
        (
            "audit",
            "--design",
            "cohort-risk",
            "--baseline",
            "8e-4",
            "--alpha",
            "1e-300",
            "--effect",
            "3",
            "--p-harm",
            "0.15",
            "--per-subject",
            "250",
            "--n-per-group",
            "2000",
        ),
        2,
        r"--alpha must be",
    ),
    Case(
        "audit p_harm 1e-320",
        (
            "audit",
            "--design",
            "cohort-risk",
            "--baseline",
            "8e-4",
            "--alpha",
            "0.05",
            "--effect",
            "3",
            "--p-harm",
            "1e-320",
            "--per-subject",
            "250",
            "--n-per-group",
            "2000",
        ),
        2,
        r"--p-harm must be",
    ),
    Case(
        "audit p_harm 1.5",
        (
            "audit",
            "--design",
            "cohort-risk",
            "--baseline",
            "8e-4",
            "--alpha",
            "0.05",
            "--effect",
            "3",
            "--p-harm",
            "1.5",
            "--per-subject",
            "250",
            "--n-per-group",
            "2000",
        ),
        2,
        r"^decide audit: --p-harm must be",
    ),
    Case(
        "audit per_subject -1",
        (
            "audit",
            "--design",
            "cohort-risk",
            "--baseline",
            "8e-4",
            "--alpha",
            "0.05",
            "--effect",
            "3",
            "--p-harm",
            "0.1",
            "--per-subject",
            "-1",
            "--n-per-group",
            "2000",
        ),
        2,
        r"^decide audit: --per-subject must be",
    ),
    Case("audit neither size nor power", _AUDIT, 2, r"--power and --n-per-group"),
    _scenario_case(
        "deeply nested TOML", "optimize", "x = " + "[" * 5000 + "]" * 5000 + "\n", 2, r"scenario\.toml: .*nest"
    ),
    _scenario_case(
        "deeply nested inline table",
        "optimize",
        "x = " + "{a = " * 3000 + "1" + "}" * 3000 + "\n",
        2,
        r"scenario\.toml: .*nest",
    ),
    _scenario_case(
        "4000-digit cap",
        "optimize",
        edit(BASE, "max_n_per_group = 4000", f"max_n_per_group = {DIGITS_4000}"),
        2,
        r"scenario\.toml: constraints\.max_n_per_group: must be",
    ),
    _scenario_case(
        "5000-digit cap",
        "optimize",
        edit(BASE, "max_n_per_group = 4000", "max_n_per_group = " + "9" * 5000),
        2,
        r"scenario\.toml: not valid TOML here: .*4300 digits",
    ),
    _scenario_case(
        "lognormal reaching 1e9",
        "optimize",
        edit(
            edit(BASE, "ratio = 3.0", "low = 0.1\nhigh = 1000.0\nlevel = 0.9"),
            'design = "cohort-risk"',
            'design = "reference-rate"',
        ),
        2,
        r"scenario\.toml: effect: ",
    ),
    _scenario_case(
        "lognormal beyond the risk limit",
        "optimize",
        edit(BASE, "ratio = 3.0", "low = 0.1\nhigh = 1000.0\nlevel = 0.9"),
        2,
        r"scenario\.toml: effect: ",
    ),
    # ---- wrong or missing messages
    _scenario_case(
        "budget 1e20",
        "compare",
        edit(BASE, "max_n_per_group = 4000", "budget = 1.0e20"),
        0,
        None,
        r'"policy": "conventional-fixed-size",\s+"title": "[^"]*",\s+"summary": "[^"]*",\s+'
        r'"feasible": true',
        "--json",
    ),
    _scenario_case(
        "budget 1e300",
        "compare",
        edit(BASE, "max_n_per_group = 4000", "budget = 1.0e300"),
        0,
        None,
        r'"policy": "conventional-fixed-size",\s+"title": "[^"]*",\s+"summary": "[^"]*",\s+'
        r'"feasible": true',
        "--json",
    ),
    _scenario_case(
        "budget 1e300, tiny per-subject cost",
        "optimize",
        edit(edit(BASE, "max_n_per_group = 4000", "budget = 1.0e300"), "per_subject = 100.0", "per_subject = 1e-300"),
        0,
    ),
    _scenario_case(
        "effect beyond the risk limit names the key",
        "optimize",
        edit(BASE, "baseline = 0.001", "baseline = 0.4"),
        2,
        r"^decide optimize: \S*scenario\.toml: effect: the effect must stay below 2\.5",
    ),
    _scenario_case(
        "baseline names the key",
        "optimize",
        edit(BASE, "baseline = 0.001", "baseline = 1.5"),
        2,
        r"scenario\.toml: study\.baseline: must be strictly between 0 and 1 \(got 1\.5\)$",
    ),
    _scenario_case(
        "sides 1.0",
        "optimize",
        edit(BASE, "baseline = 0.001", "baseline = 0.001\nsides = 1.0"),
        2,
        r"scenario\.toml: study\.sides: must be a whole number",
    ),
    _scenario_case(
        "allocation for one group",
        "optimize",
        edit(
            edit(BASE, 'design = "cohort-risk"', 'design = "reference-rate"'),
            "baseline = 0.001",
            "baseline = 0.001\nallocation = 2.0",
        ),
        2,
        r"scenario\.toml: study\.allocation: does not apply to the reference-rate design",
    ),
    _scenario_case(
        "zero false-alarm cost", "optimize", edit(BASE, "false_alarm = 1.0e7", "false_alarm = 0.0"), 0, None, None
    ),
    _scenario_case(
        "zero false-alarm cost, JSON",
        "optimize",
        edit(BASE, "false_alarm = 1.0e7", "false_alarm = 0.0"),
        0,
        None,
        r'"stated_cost_ratio": null',
        "--json",
    ),
    _scenario_case(
        "zero false-alarm cost, CSV",
        "compare",
        edit(BASE, "false_alarm = 1.0e7", "false_alarm = 0.0"),
        0,
        None,
        r"^policy,feasible",
        "--csv",
    ),
    _scenario_case(
        "zero false-alarm cost, Markdown",
        "compare",
        edit(BASE, "false_alarm = 1.0e7", "false_alarm = 0.0"),
        0,
        None,
        r"Stated cost ratio \(miss : false alarm\): none: a false alarm costs nothing",
        "--markdown",
    ),
    _scenario_case(
        "zero false-alarm cost, table",
        "compare",
        edit(BASE, "false_alarm = 1.0e7", "false_alarm = 0.0"),
        0,
        None,
        r"none: a false alarm costs",
    ),
    Case(
        "largest counts stay finite",
        _solve(
            "--baseline",
            "1e3",
            "--years",
            "1e6",
            "--effect",
            "1e4",
            "--alpha",
            "0.05",
            "--n-per-group",
            "1000000000",
            "--json",
            design="cohort-rate",
        ),
        0,
        None,
        r'"power": 1\.0',
    ),
    _scenario_case(
        "zero costs everywhere",
        "optimize",
        edit(
            edit(
                edit(BASE, "false_alarm = 1.0e7", "false_alarm = 0.0"), "missed_hazard = 1.0e8", "missed_hazard = 0.0"
            ),
            "per_subject = 100.0",
            "per_subject = 0.0",
        ),
        2,
        r"scenario\.toml: consequences: ",
    ),
    _scenario_case(
        "costs 1e308",
        "compare",
        edit(
            edit(BASE, "false_alarm = 1.0e7", "false_alarm = 1e308"), "missed_hazard = 1.0e8", "missed_hazard = 1e308"
        ),
        2,
        r"scenario\.toml: consequences\.(missed_hazard|false_alarm): must be",
    ),
    _scenario_case(
        "derived missed cost overflowing",
        "optimize",
        edit(
            BASE,
            "missed_hazard = 1.0e8",
            "exposed_population = 1e200\nbackground_rate = 1e100\ncost_per_case = 1e100\nhorizon_years = 1e100",
        ),
        2,
        r"scenario\.toml: consequences\.\w+: must be",
    ),
    _scenario_case(
        "wide prior just inside the limits",
        "compare",
        edit(
            edit(BASE, "ratio = 3.0", "low = 1.0001\nhigh = 9000.0\nlevel = 0.999999"),
            'design = "cohort-risk"',
            'design = "reference-rate"',
        ),
        0,
    ),
    _scenario_case(
        "infeasible optimize says why",
        "optimize",
        edit(BASE, "max_n_per_group = 4000", "max_n_per_group = 10\nmin_power = 0.9"),
        1,
        r"^decide optimize: cannot be done: ",
    ),
    _scenario_case(
        "nan in a file",
        "optimize",
        edit(BASE, "p_harm = 0.2", "p_harm = nan"),
        2,
        r"scenario\.toml: prior\.p_harm: must be a number \(got NaN\)",
    ),
    _scenario_case(
        "inf in a file",
        "optimize",
        edit(BASE, "per_subject = 100.0", "per_subject = inf"),
        2,
        r"scenario\.toml: consequences\.per_subject: must be a finite number",
    ),
    _scenario_case(
        "size cap 0",
        "optimize",
        edit(BASE, "max_n_per_group = 4000", "max_n_per_group = 0"),
        2,
        r"scenario\.toml: constraints\.max_n_per_group: must be",
    ),
    _scenario_case(
        "size cap beyond the limit",
        "optimize",
        edit(BASE, "max_n_per_group = 4000", "max_n_per_group = 10000000000000"),
        2,
        r"scenario\.toml: constraints\.max_n_per_group: must be",
    ),
    Case(
        "policy dir is a file",
        ("policies", "--policy-dir", "{dir}/scenario.toml"),
        2,
        r"scenario\.toml: is a file, not a folder",
        None,
        {"scenario.toml": BASE},
    ),
    Case("policy dir missing", ("policies", "--policy-dir", "{dir}/absent"), 2, r"absent: no such policy folder"),
    Case(
        "two policies of one name",
        ("policies", "--policy-dir", "{dir}/one", "--policy-dir", "{dir}/two"),
        2,
        r"two/mine\.toml: a policy named 'mine' already comes from .*one/mine\.toml",
        None,
        {"one/mine.toml": POLICY, "two/mine.toml": POLICY},
    ),
    Case(
        "a policy named like a bundled one",
        ("policies", "--policy-dir", "{dir}/one"),
        2,
        r"one/conventional-science\.toml: a policy named .* already comes from .*conventional-science\.toml",
        None,
        {"one/conventional-science.toml": POLICY},
    ),
    Case(
        "policy alpha above power",
        ("policies", "--policy-dir", "{dir}/one"),
        2,
        r"mine\.toml: power\.target: must be above alpha\.value",
        None,
        {"one/mine.toml": edit(POLICY, "target = 0.9", "target = 0.005")},
    ),
    # ---- ordinary bad values stay ordinary
    Case(
        "alpha above 1",
        _solve("--baseline", "0.01", "--effect", "3", "--alpha", "1.5", "--power", "0.8"),
        2,
        r"--alpha must be",
    ),
    Case(
        "alpha not a number",
        _solve("--baseline", "0.01", "--effect", "3", "--alpha", "abc", "--power", "0.8"),
        2,
        r"alpha",
    ),
    Case(
        "sides 3",
        _solve("--baseline", "0.01", "--effect", "3", "--alpha", "0.05", "--power", "0.8", "--sides", "3"),
        2,
        r"--sides must be 1 or 2",
    ),
    Case(
        "power below alpha",
        _solve("--baseline", "0.01", "--effect", "3", "--alpha", "0.2", "--power", "0.1"),
        2,
        r"--power must be above --alpha",
    ),
    Case("missing scenario", ("optimize", "{dir}/absent.toml"), 2, r"absent\.toml: no such file"),
]


def run_case(case: Case) -> Outcome:
    """Run one case in its own limited child, its files in a folder of its own (removed after).

    Not pytest's shared temporary folders: other runs can prune those while a
    case is running.
    """
    folder = Path(tempfile.mkdtemp(prefix="decide-bad-input-"))
    try:
        for name, text in case.files.items():
            (folder / name).parent.mkdir(parents=True, exist_ok=True)
            (folder / name).write_text(text, encoding="utf-8")
        return run_cli([a.replace("{dir}", str(folder)) for a in case.args])
    finally:
        shutil.rmtree(folder, ignore_errors=True)


@pytest.mark.parametrize("case", CLI_CASES, ids=[c.id for c in CLI_CASES])
def test_command_line_case(case: Case) -> None:
    assert_clean(run_case(case), case.code, case.match, case.out)


# --------------------------------------------------------------------------
# the Python API catalogue


def _problem(**changes: Any) -> Problem:
    parts: dict[str, Any] = {
        "study": Study("cohort-risk", 0.001),
        "effect": EffectPrior.point(3.0),
        "p_harm": 0.2,
        "consequences": Consequences(false_alarm=1e7, per_subject=100.0, missed_hazard=1e8),
        "constraints": Constraints(max_n_per_group=4000),
    }
    return Problem(**{**parts, **changes})


def _policy(**changes: Any) -> Policy:
    parts: dict[str, Any] = {
        "name": "mine",
        "title": "Mine",
        "summary": "Invented.",
        "alpha_rule": "fixed",
        "size_rule": "smallest-for-power",
        "alpha": 0.01,
        "power": 0.9,
    }
    return Policy(**{**parts, **changes})


_DERIVED = {"exposed_population": 1e4, "background_rate": 1e-3, "cost_per_case": 1e5, "horizon_years": 10.0}

API_CASES: list[tuple[str, Callable[[], Any], str]] = [
    ("power: 400-digit size", lambda: power("cohort-risk", 0.05, 10**400, 3.0, 0.01), r"^n_per_group must be"),
    ("power: size True", lambda: power("cohort-risk", 0.05, True, 3.0, 0.01), r"^n_per_group must be"),
    (
        "power: shapes that do not broadcast",
        lambda: power("cohort-risk", [0.05, 0.1], [10, 20, 30], 3.0, 0.01),
        r"^alpha, n_per_group",
    ),
    ("power: effect as text", lambda: power("cohort-risk", 0.05, 100, "three", 0.01), r"^effect must be a number"),
    (
        "power: huge allocation",
        lambda: power("cohort-risk", 0.05, 100, 3.0, 0.01, allocation=1e308),
        r"^allocation must be",
    ),
    (
        "power: allocation for one group",
        lambda: power("reference-rate", 0.05, 100, 3.0, 0.01, allocation=2.0),
        r"^allocation does not apply",
    ),
    # solve() takes arrays (solved elementwise); they must broadcast, and sizes must be whole
    (
        "solve: shapes that do not broadcast",
        lambda: solve(
            "cohort-risk", baseline=0.01, alpha=np.array([0.05, 0.1]), power=np.array([0.8, 0.85, 0.9]), effect=3.0
        ),
        r"^alpha, power, effect, baseline must have shapes that broadcast together",
    ),
    (
        "solve: a size of 10.5 in a list",
        lambda: solve("cohort-risk", baseline=0.01, alpha=0.05, n_per_group=[10, 10.5], effect=3.0),
        r"^n_per_group must be",
    ),
    (
        "solve: 400-digit cap",
        lambda: solve("cohort-risk", baseline=0.01, alpha=0.05, power=0.8, effect=3.0, max_n_per_group=10**400),
        r"^max_n_per_group must be",
    ),
    (
        "solve: sides 1.0",
        lambda: solve("cohort-risk", baseline=0.01, alpha=0.05, power=0.8, effect=3.0, sides=1.0),  # type: ignore[call-overload]
        r"^sides must be 1 or 2",
    ),
    (
        "solve: tiny baseline",
        lambda: solve("cohort-risk", baseline=1e-320, alpha=0.05, power=0.8, effect=3.0),
        r"^baseline must be",
    ),
    (
        "solve: effect 1e15",
        lambda: solve("reference-rate", baseline=1e-3, alpha=0.05, n_per_group=100, effect=1e15),
        r"^effect must be",
    ),
    (
        "audit: p_harm 1e-320",
        lambda: audit(
            "cohort-risk", baseline=8e-4, alpha=0.05, effect=3.0, p_harm=1e-320, per_subject=250.0, n_per_group=2000
        ),
        r"^p_harm must be",
    ),
    ("optimize(None)", lambda: optimize(None), r"^problem must be a Problem"),  # type: ignore[arg-type]
    (
        "compare with policy names",
        lambda: compare(_problem(), ["loss-optimal"]),  # type: ignore[list-item]
        r"^policies must be Policy objects",
    ),
    (
        "Consequences: horizon as text",
        lambda: Consequences(false_alarm=1.0, per_subject=1.0, **{**_DERIVED, "horizon_years": "x"}),  # type: ignore[arg-type]
        r"^consequences\.horizon_years must be a number",
    ),
    (
        "Consequences: cost 1e308",
        lambda: Consequences(false_alarm=1e308, per_subject=1.0, missed_hazard=1.0),
        r"^consequences\.false_alarm must be",
    ),
    (
        "Consequences: nothing costs anything",
        lambda: Consequences(false_alarm=0.0, per_subject=0.0, missed_hazard=0.0),
        r"^consequences: ",
    ),
    ("EffectPrior(nan)", lambda: EffectPrior(math.nan), r"^effect\.median must be a number"),
    ("EffectPrior: negative log_sd", lambda: EffectPrior(2.0, -1.0), r"^effect\.log_sd must be"),
    ("EffectPrior: NaN log_sd", lambda: EffectPrior(2.0, math.nan), r"^effect\.log_sd must be a number"),
    ("EffectPrior: ratio 1e10", lambda: EffectPrior.point(1e10), r"^effect\.ratio must be"),
    ("Problem(consequences=None)", lambda: _problem(consequences=None), r"^consequences must be"),
    ("Problem(study='cohort-risk')", lambda: _problem(study="cohort-risk"), r"^study must be"),
    ("Problem: p_harm 1e-320", lambda: _problem(p_harm=1e-320), r"^prior\.p_harm must be"),
    (
        "Constraints(max_n_per_group=1.5)",
        lambda: Constraints(max_n_per_group=1.5),  # type: ignore[arg-type]
        r"^constraints\.max_n_per_group must be a whole number",
    ),
    (
        "Constraints: 400-digit cap",
        lambda: Constraints(max_n_per_group=10**400),
        r"^constraints\.max_n_per_group must be",
    ),
    ("Constraints: budget nan", lambda: Constraints(budget=math.nan), r"^constraints\.budget must be a number"),
    (
        "Policy(alpha=0.5, power=0.1)",
        lambda: _policy(alpha=0.5, power=0.1),
        r"^policy mine: power\.target must be above alpha\.value",
    ),
    ("Policy: alpha nan", lambda: _policy(alpha=math.nan), r"^policy mine: alpha\.value must be a number"),
    (
        "Study: allocation for one group",
        lambda: Study("reference-rate", 1e-3, allocation=2.0),
        r"^allocation does not apply to the reference-rate design",
    ),
    (
        "Study: years for a case count",
        lambda: Study("cohort-risk", 1e-3, years=5.0),
        r"^years does not apply to the cohort-risk design",
    ),
    (
        "Study: continuity for rates",
        lambda: Study("cohort-rate", 1e-3, continuity=True),
        r"^continuity does not apply to the cohort-rate design",
    ),
    (
        "Study: sides 1.0",
        lambda: Study("cohort-risk", 1e-3, sides=1.0),  # type: ignore[arg-type]
        r"^sides must be 1 or 2",
    ),
]


@pytest.mark.parametrize(("call", "match"), [c[1:] for c in API_CASES], ids=[c[0] for c in API_CASES])
def test_api_case(call: Callable[[], Any], match: str) -> None:
    with pytest.raises(DecideError, match=match) as info:
        call()
    assert not isinstance(info.value, InfeasibleError)
    assert "\n" not in str(info.value)
    assert not _NON_FINITE.search(_ECHO.sub("", str(info.value))), str(info.value)


# --------------------------------------------------------------------------
# one rule, one reason: the API and the scenario file agree


_REASON = re.compile(r"^(?P<name>[\w.]+):? (?P<reason>.*), but got (?P<got>[^,]*)$")
_FILE_REASON = re.compile(r"^<file>: (?P<key>[\w.]+): (?P<reason>.*) \(got (?P<got>[^()]*)\)$")

# (what is wrong, the file as edited, the same values through the API)
SAME_REASON: list[tuple[str, str, Callable[[], Any]]] = [
    ("baseline above 1", edit(BASE, "baseline = 0.001", "baseline = 1.5"), lambda: Study("cohort-risk", 1.5)),
    ("baseline tiny", edit(BASE, "baseline = 0.001", "baseline = 1e-300"), lambda: Study("cohort-risk", 1e-300)),
    (
        "allocation negative",
        edit(BASE, "baseline = 0.001", "baseline = 0.001\nallocation = -1.0"),
        lambda: Study("cohort-risk", 0.001, allocation=-1.0),
    ),
    (
        "allocation huge",
        edit(BASE, "baseline = 0.001", "baseline = 0.001\nallocation = 1e6"),
        lambda: Study("cohort-risk", 0.001, allocation=1e6),
    ),
    (
        "allocation for one group",
        edit(
            edit(BASE, 'design = "cohort-risk"', 'design = "reference-rate"'),
            "baseline = 0.001",
            "baseline = 0.001\nallocation = 2.0",
        ),
        lambda: Study("reference-rate", 0.001, allocation=2.0),
    ),
    (
        "years zero",
        edit(
            edit(BASE, 'design = "cohort-risk"', 'design = "cohort-rate"'),
            "baseline = 0.001",
            "baseline = 0.001\nyears = 0.0",
        ),
        lambda: Study("cohort-rate", 0.001, years=0.0),
    ),
    (
        "years for cohort-risk",
        edit(BASE, "baseline = 0.001", "baseline = 0.001\nyears = 5.0"),
        lambda: Study("cohort-risk", 0.001, years=5.0),
    ),
    (
        "sides 3",
        edit(BASE, "baseline = 0.001", "baseline = 0.001\nsides = 3"),
        lambda: Study("cohort-risk", 0.001, sides=3),
    ),
    ("ratio 0.8", edit(BASE, "ratio = 3.0", "ratio = 0.8"), lambda: EffectPrior.point(0.8)),
    ("ratio 1e9", edit(BASE, "ratio = 3.0", "ratio = 1e9"), lambda: EffectPrior.point(1e9)),
    (
        "low zero",
        edit(BASE, "ratio = 3.0", "low = 0.0\nhigh = 4.0\nlevel = 0.9"),
        lambda: EffectPrior.from_interval(0.0, 4.0, 0.9),
    ),
    (
        "level 1.5",
        edit(BASE, "ratio = 3.0", "low = 2.0\nhigh = 4.0\nlevel = 1.5"),
        lambda: EffectPrior.from_interval(2.0, 4.0, 1.5),
    ),
    (
        "median outside",
        edit(BASE, "ratio = 3.0", "low = 2.0\nhigh = 4.0\nlevel = 0.9\nmedian = 5.0"),
        lambda: EffectPrior.from_interval(2.0, 4.0, 0.9, 5.0),
    ),
    ("p_harm 1.2", edit(BASE, "p_harm = 0.2", "p_harm = 1.2"), lambda: _problem(p_harm=1.2)),
    ("p_harm nan", edit(BASE, "p_harm = 0.2", "p_harm = nan"), lambda: _problem(p_harm=math.nan)),
    (
        "false alarm -3",
        edit(BASE, "false_alarm = 1.0e7", "false_alarm = -3.0"),
        lambda: Consequences(false_alarm=-3.0, per_subject=100.0, missed_hazard=1e8),
    ),
    (
        "per subject inf",
        edit(BASE, "per_subject = 100.0", "per_subject = inf"),
        lambda: Consequences(false_alarm=1e7, per_subject=math.inf, missed_hazard=1e8),
    ),
    (
        "missed hazard 1e308",
        edit(BASE, "missed_hazard = 1.0e8", "missed_hazard = 1e308"),
        lambda: Consequences(false_alarm=1e7, per_subject=100.0, missed_hazard=1e308),
    ),
    (
        "horizon zero",
        edit(
            BASE,
            "missed_hazard = 1.0e8",
            "exposed_population = 1e4\nbackground_rate = 1e-3\ncost_per_case = 1e5\nhorizon_years = 0.0",
        ),
        lambda: Consequences(false_alarm=1e7, per_subject=100.0, **{**_DERIVED, "horizon_years": 0.0}),
    ),
    ("cap 0", edit(BASE, "max_n_per_group = 4000", "max_n_per_group = 0"), lambda: Constraints(max_n_per_group=0)),
    (
        "cap below least",
        edit(BASE, "max_n_per_group = 4000", "max_n_per_group = 5\nmin_n_per_group = 6"),
        lambda: Constraints(max_n_per_group=5, min_n_per_group=6),
    ),
    ("max alpha 1.5", edit(BASE, "max_n_per_group = 4000", "max_alpha = 1.5"), lambda: Constraints(max_alpha=1.5)),
    ("min power 1", edit(BASE, "max_n_per_group = 4000", "min_power = 1.0"), lambda: Constraints(min_power=1.0)),
    ("budget -1", edit(BASE, "max_n_per_group = 4000", "budget = -1.0"), lambda: Constraints(budget=-1.0)),
    (
        "budget below the smallest study",
        edit(BASE, "max_n_per_group = 4000", "budget = 100.0"),
        lambda: _problem(constraints=Constraints(budget=100.0)),
    ),
]


def _split_api(message: str) -> tuple[str, str, str]:
    match = _REASON.match(message)
    assert match, message
    return match["name"], match["reason"], match["got"]


@pytest.mark.parametrize(("text", "call"), [c[1:] for c in SAME_REASON], ids=[c[0] for c in SAME_REASON])
def test_api_and_file_give_the_same_reason(text: str, call: Callable[[], Any]) -> None:
    with pytest.raises(DecideError) as api:
        call()
    with pytest.raises(ScenarioError) as file:
        parse_scenario(text, "<file>")
    name, reason, got = _split_api(str(api.value))
    match = _FILE_REASON.match(str(file.value))
    assert match, str(file.value)
    assert match["key"].endswith(name) or name.endswith(match["key"]), (str(api.value), str(file.value))
    assert match["reason"] == reason, (str(api.value), str(file.value))
    assert float(match["got"]) == pytest.approx(float(got), rel=1e-5) or match["got"] == got


def test_policy_file_and_api_give_the_same_reason(tmp_path: Path) -> None:
    folder = tmp_path / "p"
    folder.mkdir()
    (folder / "mine.toml").write_text(edit(POLICY, "target = 0.9", "target = 0.005"))
    with pytest.raises(DecideError) as api:
        _policy(alpha=0.01, power=0.005)
    with pytest.raises(ScenarioError) as file:
        load_policies([folder])
    api_reason = str(api.value).removeprefix("policy mine: power.target ")
    file_reason = api_reason.replace(", but got ", " (got ") + ")"
    assert str(file.value) == f"{folder / 'mine.toml'}: power.target: {file_reason}"


# --------------------------------------------------------------------------
# fuzz: scenario files and API arguments


_ODD_FLOATS = st.one_of(
    st.sampled_from(
        [0.0, -0.0, 1.0, -1.0, 1e-320, 5e-324, 1e-300, 1e-12, 0.5, 1e12, 1e300, 1e308, math.inf, -math.inf, math.nan]
    ),
    st.floats(allow_nan=True, allow_infinity=True),
)
_NUMBER_KEYS = [
    ("study", "baseline"),
    ("study", "allocation"),
    ("effect", "ratio"),
    ("prior", "p_harm"),
    ("consequences", "missed_hazard"),
    ("consequences", "false_alarm"),
    ("consequences", "per_subject"),
    ("consequences", "fixed"),
    ("constraints", "budget"),
    ("constraints", "max_alpha"),
    ("constraints", "min_power"),
]


def _toml_number(x: float) -> str:
    if math.isnan(x):
        return "nan"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return repr(float(x))


@settings(max_examples=30)
@given(key=st.sampled_from(_NUMBER_KEYS), value=_ODD_FLOATS)
def test_fuzz_scenario_values(key: tuple[str, str], value: float) -> None:
    """Any number in any key: loads, or fails with one line naming the key (or a rule it ties)."""
    table, name = key
    lines = [ln for ln in BASE.splitlines() if not ln.startswith(f"{name} =")]
    lines.insert(lines.index(f"[{table}]") + 1, f"{name} = {_toml_number(value)}")
    text = "\n".join(lines) + "\n"
    try:
        loaded = parse_scenario(text, "<fuzz>")
    except ScenarioError as e:
        message = str(e)
        assert "\n" not in message and message.startswith("<fuzz>: ")
        assert not _NON_FINITE.search(_ECHO.sub("", message)), message
        return
    decision = optimize(loaded.problem)
    for value_out in decision.to_dict().values():
        if isinstance(value_out, float):
            assert math.isfinite(value_out), decision


@given(
    alpha=_ODD_FLOATS,
    n=st.one_of(st.integers(-5, 10**6), st.sampled_from([10**30, 10**400])),
    effect=_ODD_FLOATS,
    baseline=_ODD_FLOATS,
    design=st.sampled_from(["cohort-risk", "cohort-rate", "reference-rate", "case-control"]),
)
def test_fuzz_power_arguments(alpha: float, n: int, effect: float, baseline: float, design: str) -> None:
    """power() answers with finite numbers or raises DecideError; nothing else escapes."""
    try:
        r = power(design, alpha, n, effect, baseline, test="normal")
    except DecideError as e:
        assert "\n" not in str(e)
        return
    assert np.all(np.isfinite(r.power)) and np.all(np.isfinite(r.attained_alpha))


@given(
    alpha=_ODD_FLOATS,
    target=_ODD_FLOATS,
    effect=_ODD_FLOATS,
    design=st.sampled_from(["cohort-risk", "cohort-rate", "reference-rate", "case-control"]),
)
def test_fuzz_solve_arguments(alpha: float, target: float, effect: float, design: str) -> None:
    """solve() for a size answers with a whole size or raises DecideError (InfeasibleError included)."""
    try:
        s = solve(design, baseline=0.01, alpha=alpha, power=target, effect=effect, test="normal")
    except DecideError as e:
        assert "\n" not in str(e)
        return
    assert s.n_per_group >= 1 and math.isfinite(s.power)

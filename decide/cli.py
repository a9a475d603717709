"""The ``decide`` command line: a thin layer over the Python API.

Exit status: 0 done; 1 a computation with no answer within the caps;
2 bad usage or bad input (one line on stderr, no traceback unless --debug).
"""

from __future__ import annotations

import json
import re
import signal
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from enum import StrEnum
from pathlib import Path
from types import FrameType
from typing import Annotated, Any, NoReturn

import typer
from rich.console import Console
from typer.core import TyperGroup

from .decision.audit import audit as _audit
from .decision.optimize import compare as _compare
from .decision.optimize import optimize as _optimize
from .engine.solve import MAX_N_PER_GROUP
from .engine.solve import solve as _solve
from .errors import DecideError, InfeasibleError
from .report import console as render
from .report import tables
from .report.sentences import best_action, decision_record, recommendation
from .report.text import json_safe
from .scenario import (
    check_output_path,
    example_names,
    example_text,
    load_policies,
    load_scenario,
    policy_json_schema,
    scenario_json_schema,
    scenario_template,
    write_text_atomic,
)

_OPTIONS = {
    "alpha": "--alpha",
    "power": "--power",
    "n_per_group": "--n-per-group",
    "effect": "--effect",
    "baseline": "--baseline",
    "allocation": "--allocation",
    "years": "--years",
    "sides": "--sides",
    "test": "--test",
    "design": "--design",
    "continuity": "--continuity",
    "max_n_per_group": "--max-n-per-group",
    "example": "--example",
}
_DEBUG = {"on": False}


class _OneLineErrors(TyperGroup):
    """Print usage errors as one line and exit 2; keep tracebacks for --debug."""

    def main(self, *args: Any, **kwargs: Any) -> Any:
        kwargs["standalone_mode"] = False
        kwargs["prog_name"] = "decide"
        try:
            code = super().main(*args, **kwargs)
        except typer.Abort:
            _fail("decide: aborted", 1)
        except Exception as exc:
            # typer's usage errors (bad option values, missing options)
            if not (hasattr(exc, "format_message") and hasattr(exc, "exit_code")):
                raise
            if type(exc).__name__ == "NoArgsIsHelpError":
                sys.stdout.write(exc.format_message() + "\n")
                sys.exit(0)
            ctx = getattr(exc, "ctx", None)
            name = getattr(ctx, "command_path", None) or "decide"
            _fail(f"{name}: {exc.format_message()}", 2)
        sys.exit(code if isinstance(code, int) else 0)


def _fail(message: str, code: int) -> NoReturn:
    sys.stderr.write(" ".join(message.split()) + "\n")
    sys.exit(code)


app = typer.Typer(
    cls=_OneLineErrors,
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    help="Choose alpha, beta and study size for rare-disease risk studies from what each error costs.",
)


def _show_version(value: bool) -> None:
    if value:
        from . import __version__

        sys.stdout.write(f"decide {__version__}\n")
        raise typer.Exit()


@app.callback()
def _root(
    debug: Annotated[bool, typer.Option("--debug", help="Show tracebacks for errors.")] = False,
    version: Annotated[
        bool, typer.Option("--version", callback=_show_version, is_eager=True, help="Print the version and exit.")
    ] = False,
) -> None:
    _DEBUG["on"] = debug


def _option_words(exc: DecideError) -> str:
    """The error message with the parameters it names spelt as options."""
    message = str(exc)
    for name in exc.params:
        if name in _OPTIONS:
            message = re.sub(rf"(?<![\w-]){re.escape(name)}(?![\w-])", _OPTIONS[name], message)
    return message


def run_api(command: str, call: Any) -> Any:
    """Run an API call; turn our errors into one line and the right exit status."""
    try:
        return call()
    except InfeasibleError as exc:
        if _DEBUG["on"]:
            raise
        _fail(f"decide {command}: cannot be done: {_option_words(exc)}", 1)
    except DecideError as exc:
        if _DEBUG["on"]:
            raise
        _fail(f"decide {command}: {_option_words(exc)}", 2)


def emit_json(data: Any) -> None:
    """Machine output: plain JSON on stdout, never through rich."""
    sys.stdout.write(json.dumps(json_safe(data), indent=2) + "\n")


class Design(StrEnum):
    cohort_risk = "cohort-risk"
    cohort_rate = "cohort-rate"
    reference_rate = "reference-rate"
    case_control = "case-control"


class Test(StrEnum):
    auto = "auto"
    normal = "normal"
    exact = "exact"


@app.command("solve")
def solve_command(
    design: Annotated[Design, typer.Option(help="Study design.")],
    baseline: Annotated[
        float,
        typer.Option(
            help="Risk over follow-up (cohort-risk), rate per person-year (cohort-rate), "
            "reference rate per person-year (reference-rate) or exposure prevalence "
            "among controls (case-control)."
        ),
    ],
    effect: Annotated[
        float | None, typer.Option(help="Risk ratio, rate ratio, SIR or odds ratio; leave out to solve.")
    ] = None,
    alpha: Annotated[float | None, typer.Option(help="Significance level; leave out to solve.")] = None,
    power: Annotated[float | None, typer.Option(help="Power; leave out to solve.")] = None,
    n_per_group: Annotated[
        int | None,
        typer.Option(help="Exposed subjects (cohorts) or cases (case-control); leave out to solve."),
    ] = None,
    allocation: Annotated[
        float | None, typer.Option(help="Unexposed per exposed, or controls per case (default 1).")
    ] = None,
    years: Annotated[
        float | None, typer.Option(help="Follow-up years per subject, person-time designs (default 1).")
    ] = None,
    sides: Annotated[int, typer.Option(help="1 = one-sided test of harm, 2 = two-sided.")] = 1,
    test: Annotated[Test, typer.Option(help="normal, exact, or auto (exact below 10 expected).")] = Test.auto,
    continuity: Annotated[
        bool, typer.Option("--continuity", help="Continuity-correct the normal two-proportion test.")
    ] = False,
    max_n_per_group: Annotated[int, typer.Option(help="Cap on a solved size.")] = MAX_N_PER_GROUP,
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object.")] = False,
) -> None:
    """Solve for whichever of alpha, power, size or effect is left out."""
    solution = run_api(
        "solve",
        lambda: _solve(
            design.value,
            baseline=baseline,
            alpha=alpha,
            power=power,
            n_per_group=n_per_group,
            effect=effect,
            allocation=allocation,
            years=years,
            sides=sides,
            test=test.value,
            continuity=continuity,
            max_n_per_group=max_n_per_group,
        ),
    )
    if as_json:
        emit_json(solution.to_dict())
    else:
        Console().print(render.solution_table(solution))


ScenarioPath = Annotated[Path, typer.Argument(help="Scenario file (TOML).", show_default=False)]
JsonFlag = Annotated[bool, typer.Option("--json", help="Print JSON instead of a table.")]
PolicyDirs = Annotated[
    list[Path] | None, typer.Option("--policy-dir", help="Extra folder of policy files (repeatable).")
]


def _check_output(command: str, output: Path | None, force: bool) -> None:
    """Refuse an unusable --output in one line before any computation."""
    if output is None:
        return
    try:
        check_output_path(output, overwrite=force)
    except DecideError as exc:
        if _DEBUG["on"]:
            raise
        _fail(f"decide {command}: --output {exc}", 2)


def _emit_text(text: str, output: Path | None, force: bool) -> None:
    if output is None:
        sys.stdout.write(text)
    else:
        write_text_atomic(output, text, overwrite=force)
        sys.stderr.write(f"wrote {output}\n")


@app.command("optimize")
def optimize_command(scenario: ScenarioPath, as_json: JsonFlag = False) -> None:
    """Find the alpha, beta and size that minimise expected loss for a scenario."""
    loaded = run_api("optimize", lambda: load_scenario(scenario))
    decision = run_api("optimize", lambda: _optimize(loaded.problem))
    if as_json:
        emit_json({"scenario": loaded.title, **decision_record(decision)})
    else:
        con = Console()
        if decision.action in ("flag-now", "clear-now"):  # lead with it: no study is worth its cost
            con.print(recommendation(decision), style="bold", markup=False, highlight=False)
        con.print(render.inputs_table(loaded.problem.describe(), loaded.currency or ""))
        con.print(render.decision_table(decision, loaded.title, loaded.currency or ""))
    if not decision.feasible:
        raise typer.Exit(1)


@app.command("compare")
def compare_command(
    scenario: ScenarioPath,
    policy: Annotated[
        list[str] | None, typer.Option("--policy", help="Policy to include (repeatable; default all).")
    ] = None,
    policy_dir: PolicyDirs = None,
    as_json: JsonFlag = False,
    as_csv: Annotated[bool, typer.Option("--csv", help="Print CSV.")] = False,
    as_markdown: Annotated[bool, typer.Option("--markdown", help="Print a Markdown table.")] = False,
    output: Annotated[Path | None, typer.Option(help="Write to this file (not overwritten unless --force).")] = None,
    force: Annotated[bool, typer.Option("--force", help="Overwrite --output.")] = False,
) -> None:
    """Set policies side by side for a scenario: alpha, beta, size, loss, regret, implied cost ratio."""
    _check_output("compare", output, force)
    loaded = run_api("compare", lambda: load_scenario(scenario))
    known = run_api("compare", lambda: load_policies(policy_dir or ()))
    if policy:
        unknown = [p for p in policy if p not in known]
        if unknown:
            _fail(f"decide compare: --policy must be one of {', '.join(known)}, but got {unknown[0]!r}", 2)
        chosen = [known[p] for p in dict.fromkeys(policy)]
    else:
        chosen = list(known.values())
    decisions = run_api("compare", lambda: _compare(loaded.problem, chosen))
    if sum((as_json, as_csv, as_markdown)) > 1:
        _fail("decide compare: choose one of --json, --csv and --markdown", 2)
    if as_json:
        rows = [{"scenario": loaded.title, **decision_record(d)} for d in decisions]
        text = json.dumps(json_safe(rows), indent=2) + "\n"
    elif as_csv:
        text = tables.to_csv(decisions)
    elif as_markdown:
        text = tables.to_markdown(decisions, loaded.title, loaded.problem.describe())
    else:
        if output is not None:
            _fail("decide compare: --output needs one of --json, --csv or --markdown", 2)
        con = Console()
        if decisions.best_action != "study":  # lead with it: no study is worth its cost
            con.print(best_action(decisions), style="bold", markup=False, highlight=False)
        con.print(render.inputs_table(loaded.problem.describe(), loaded.currency or ""))
        con.print(render.compare_table(decisions, loaded.title, loaded.currency or "", con.width))
        return
    run_api("compare", lambda: _emit_text(text, output, force))


@app.command("audit")
def audit_command(
    design: Annotated[Design, typer.Option(help="Study design.")],
    baseline: Annotated[float, typer.Option(help="Baseline, as in 'decide solve'.")],
    alpha: Annotated[float, typer.Option(help="The protocol's significance level.")],
    effect: Annotated[float, typer.Option(help="The effect the protocol was sized for.")],
    p_harm: Annotated[float, typer.Option(help="Prior probability that the exposure is harmful.")],
    per_subject: Annotated[float, typer.Option(help="Study cost per enrolled subject.")],
    power: Annotated[float | None, typer.Option(help="The power the protocol was sized for.")] = None,
    n_per_group: Annotated[int | None, typer.Option(help="The protocol's size (instead of --power).")] = None,
    allocation: Annotated[float | None, typer.Option(help="Unexposed per exposed, or controls per case.")] = None,
    years: Annotated[float | None, typer.Option(help="Follow-up years per subject.")] = None,
    sides: Annotated[int, typer.Option(help="1 = one-sided test of harm, 2 = two-sided.")] = 1,
    test: Annotated[Test, typer.Option(help="normal, exact, or auto.")] = Test.auto,
    unit: Annotated[str, typer.Option(help="Label for costs in the output.")] = "",
    as_json: JsonFlag = False,
) -> None:
    """Reveal the value judgments a protocol's alpha and size imply."""
    result = run_api(
        "audit",
        lambda: _audit(
            design.value, baseline=baseline, alpha=alpha, effect=effect, p_harm=p_harm,
            per_subject=per_subject, power=power, n_per_group=n_per_group, allocation=allocation,
            years=years, sides=sides, test=test.value,
        ),
    )
    if as_json:
        emit_json(result.to_dict())
    else:
        Console().print(render.audit_table(result, unit))


@app.command("policies")
def policies_command(policy_dir: PolicyDirs = None, as_json: JsonFlag = False) -> None:
    """List the policies available to 'decide compare'."""
    known = run_api("policies", lambda: load_policies(policy_dir or ()))
    if as_json:
        from dataclasses import asdict

        emit_json([asdict(p) for p in known.values()])
        return
    from rich.table import Table

    t = Table(title="Policies")
    for col in ("name", "alpha rule", "power at the design effect", "size rule"):
        t.add_column(col)
    for p in known.values():
        power = "-" if p.power is None else f"{p.power:g}" + (", beta <= alpha" if p.beta_at_most_alpha else "")
        rule = p.alpha_rule + (f" {p.alpha:g}" if p.alpha is not None else "")
        rule += f" {p.posterior_threshold:g}" if p.posterior_threshold is not None else ""
        t.add_row(p.name, rule, power, p.size_rule)
    con = Console()
    con.print(t)
    for p in known.values():
        con.print(f"[bold]{p.title}[/bold] ({p.name}): {' '.join(p.summary.split())}", highlight=False)


@app.command("schema")
def schema_command(
    kind: Annotated[str, typer.Argument(help="scenario or policy.")] = "scenario",
) -> None:
    """Print the JSON Schema of scenario (or policy) files."""
    if kind not in ("scenario", "policy"):
        _fail(f"decide schema: KIND must be scenario or policy, but got {kind!r}", 2)
    emit_json(scenario_json_schema() if kind == "scenario" else policy_json_schema())


def _example_help() -> str:
    try:
        names = ", ".join(example_names())
    except DecideError:
        names = "(none found)"
    return f"Start from a bundled invented example scenario: {names}."


@app.command("new")
def new_command(
    path: Annotated[Path, typer.Argument(help="Where to write the scenario template.")],
    example: Annotated[str | None, typer.Option("--example", help=_example_help(), show_default=False)] = None,
    force: Annotated[bool, typer.Option("--force", help="Overwrite an existing file.")] = False,
) -> None:
    """Write a commented scenario template (or a bundled example) to start from."""
    text = scenario_template() if example is None else run_api("new", lambda: example_text(example))
    run_api("new", lambda: write_text_atomic(path, text, overwrite=force))
    sys.stderr.write(f"wrote {path}; edit it, then run: decide compare {path}\n")


class _Interrupted(BaseException):
    """SIGINT or SIGTERM arrived; not an ``Exception``, so nothing on the way catches it."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum


def _interrupt(signum: int, frame: FrameType | None) -> None:
    raise _Interrupted(signum)


@contextmanager
def _signals_abort() -> Iterator[None]:
    """Turn SIGINT and SIGTERM into ``_Interrupted``; signals ignored at start stay ignored."""
    usual = {signal.SIGINT: signal.default_int_handler, signal.SIGTERM: signal.SIG_DFL}
    previous = {}
    for signum, default in usual.items():
        if signal.getsignal(signum) is default:
            previous[signum] = signal.signal(signum, _interrupt)
    try:
        yield
    finally:
        for signum, old in previous.items():
            signal.signal(signum, old)


def main() -> None:
    """Console-script entry point.

    Ctrl-C (SIGINT) and SIGTERM stop the command with "decide: aborted" and
    exit status 128 + the signal's number (130, 143); a file being written is
    left as it was (see :func:`decide.scenario.write_text_atomic`).
    """
    try:
        with _signals_abort():
            app()
    except (_Interrupted, KeyboardInterrupt) as exc:
        signum = exc.signum if isinstance(exc, _Interrupted) else signal.SIGINT
        _fail("decide: aborted", 128 + signum)

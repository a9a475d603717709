"""The ``decide`` command line: a thin layer over the Python API.

Exit status: 0 done; 1 a computation with no answer within the caps;
2 bad usage or bad input (one line on stderr, no traceback unless --debug).
"""

from __future__ import annotations

import json
import re
import sys
from enum import Enum
from typing import Annotated, Any, NoReturn

import typer
from rich.console import Console
from typer.core import TyperGroup

from . import solve as _solve
from .errors import DecideError, InfeasibleError
from .report import console as render
from .report.text import json_safe

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
}
_DEBUG = {"on": False}


class _OneLineErrors(TyperGroup):
    """Print usage errors as one line and exit 2; keep tracebacks for --debug."""

    def main(self, *args: Any, **kwargs: Any) -> Any:
        kwargs["standalone_mode"] = False
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


@app.callback()
def _root(
    debug: Annotated[bool, typer.Option("--debug", help="Show tracebacks for errors.")] = False,
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


class Design(str, Enum):
    cohort_risk = "cohort-risk"
    cohort_rate = "cohort-rate"
    reference_rate = "reference-rate"
    case_control = "case-control"


class Test(str, Enum):
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
    max_n_per_group: Annotated[int, typer.Option(help="Cap on a solved size.")] = _solve.MAX_N_PER_GROUP,
    as_json: Annotated[bool, typer.Option("--json", help="Print one JSON object.")] = False,
) -> None:
    """Solve for whichever of alpha, power, size or effect is left out."""
    solution = run_api(
        "solve",
        lambda: _solve.solve(
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


def main() -> None:
    """Console-script entry point."""
    app()

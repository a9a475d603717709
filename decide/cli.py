"""The ``decide`` command line: a thin layer over the Python API.

Exit status: 0 done; 1 a computation with no answer within the caps;
2 bad usage or bad input (one line on stderr, no traceback unless --debug).
"""

from __future__ import annotations

import json
import re
import signal
import sys
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from enum import StrEnum
from pathlib import Path
from types import FrameType
from typing import TYPE_CHECKING, Annotated, Any, NoReturn, TypedDict

import typer
from typer.core import TyperGroup

from .decision.audit import audit as _audit
from .decision.optimize import compare as _compare
from .decision.optimize import optimize as _optimize
from .decision.prior import EffectPrior
from .designs import DESIGNS, StudyDesign, get_design
from .engine.solve import MAX_N_PER_GROUP
from .engine.solve import solve as _solve
from .errors import DecideError, InfeasibleError
from .report import audit_words, tables
from .report import console as render
from .report.inputs import scenario_inputs
from .report.numbers import for_json
from .report.progress import busy
from .report.sentences import best_action, decision_record, recommendation
from .report.text import CAUTION, one_line
from .scenario import (
    LoadedScenario,
    ScenarioError,
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

if TYPE_CHECKING:
    from .decision.inputs import InputRange
    from .decision.problem import Problem
    from .decision.uncertainty import Distribution

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
    "vary": "--vary",
    "draws": "--draws",
    "studies": "--studies",
    "points": "--points",
    "missed_hazard": "--missed-hazard",
    "false_alarm": "--false-alarm",
    "effect.low": "--effect-low",
    "effect.high": "--effect-high",
    "effect.level": "--effect-level",
    "p_harm": "--p-harm",
    "per_subject": "--per-subject",
    "confidence": "--confidence",
}
_DEBUG = {"on": False}


class _OneLineErrors(TyperGroup):
    """Print usage errors as one line and exit 2; keep tracebacks for --debug."""

    def main(self, *args: Any, **kwargs: Any) -> Any:
        kwargs["standalone_mode"] = False
        kwargs["prog_name"] = "decide"
        _plain_help(self)
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


def _plain_help(group: Any) -> None:
    """Help in plain words: FILE, NUMBER, NAME..., never internal type names or braces."""
    for command in group.commands.values():
        if hasattr(command, "commands"):
            _plain_help(command)
            continue
        for param in command.params:
            if param.metavar is not None or getattr(param, "is_flag", False):
                continue
            if param.param_type_name == "argument":
                name = (param.name or "arg").upper()
                param.metavar = name
                shown = name if param.required else f"[{name}]"
                param.get_usage_pieces = lambda ctx, shown=shown: [shown]
                param.display_type_rich = lambda ctx: None
            else:
                param.metavar = _metavar(param)


def _metavar(param: Any) -> str:
    desc = param.type_descriptor
    base = desc.annotation
    if desc.is_list:
        base = getattr(base, "__args__", (str,))[0]
    if desc.is_choice:
        text = "[" + "|".join(str(getattr(c, "value", c)) for c in desc.choices or ()) + "]"
    elif desc.is_path or base is Path:
        text = "DIR" if (param.name or "").endswith("dir") else "FILE"
    elif base is int:
        text = "INTEGER"
    elif base is float:
        text = "NUMBER"
    else:
        text = "NAME" if desc.is_list else "TEXT"
    return text + ("..." if desc.is_list else "")


def _fail(message: str, code: int) -> NoReturn:
    text = re.sub(r"\b(Value|Assertion|Type) error, ", "", " ".join(message.split()))
    sys.stderr.write(one_line(text) + "\n")
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
    """The error message with the parameters it names spelt as options.

    Errors about a file keep the file's key paths: they name no option.
    """
    message = str(exc)
    if isinstance(exc, ScenarioError):
        return message
    for name in exc.params:
        if name in _OPTIONS:
            message = re.sub(rf"(?<![\w-]){re.escape(name)}(?![\w-])", _OPTIONS[name], message)
    return message


def run_api(command: str, call: Any) -> Any:
    """Run an API call; turn our errors into one line and the right exit status.

    Warnings raised during the call are printed as one plain line each on
    stderr (``decide solve: warning: ...``), never with a source path.
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            return _run(command, call)
        finally:
            for message in dict.fromkeys(str(w.message) for w in caught):
                sys.stderr.write(f"decide {command}: warning: {one_line(message)}\n")


def _run(command: str, call: Any) -> Any:
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


def json_text(data: Any) -> str:
    """Machine output: standard JSON, snake_case keys, non-finite numbers as null."""
    return json.dumps(for_json(data), indent=2) + "\n"


def emit_json(data: Any) -> None:
    """Plain JSON on stdout, never through rich."""
    sys.stdout.write(json_text(data))


def _by_design(attribute: str) -> str:
    """One design attribute for every design, ``"value (names)"``, read from the registry."""
    names: dict[str, list[str]] = {}
    for name, d in DESIGNS.items():
        if getattr(d, attribute):
            names.setdefault(getattr(d, attribute), []).append(name)
    return "; ".join(f"{value} ({', '.join(which)})" for value, which in names.items())


if TYPE_CHECKING:
    Design = str
else:  # the --design choices are the registry's names
    Design = StrEnum("Design", {name.replace("-", "_"): name for name in DESIGNS})
DesignOption = Annotated[Design, typer.Option(help="Study design.", show_default=False)]
DesignSettings = Annotated[
    list[str] | None,
    typer.Option(
        "--design-setting",
        metavar="KEY=VALUE",
        help="A setting of the design itself, KEY=VALUE (repeatable): "
        + "; ".join(f"{k} ({name}): {text}" for name, d in DESIGNS.items() for k, text in d.settings.items())
        + ".",
    ),
]


def _design(name: str, settings: list[str] | None) -> StudyDesign:
    """The named design with its own settings (``KEY=VALUE`` words) set."""
    values: dict[str, float] = {}
    for word in settings or ():
        key, sep, value = word.partition("=")
        try:
            values[key.strip()] = float(value)
        except ValueError:
            sep = ""
        if not sep:
            raise DecideError(f"--design-setting must be KEY=VALUE with a number, but got {word!r}", ())
    try:
        return get_design(name).configure(values)
    except DecideError as exc:
        raise DecideError(str(exc).replace("design_settings.", "--design-setting "), ()) from None


class Test(StrEnum):
    auto = "auto"
    normal = "normal"
    exact = "exact"


@app.command("solve")
def solve_command(
    design: DesignOption,
    baseline: Annotated[float, typer.Option(help="By design: " + _by_design("baseline_name") + ".")],
    effect: Annotated[
        float | None, typer.Option(help="By design: " + _by_design("effect_name") + "; leave out to solve.")
    ] = None,
    alpha: Annotated[float | None, typer.Option(help="Significance level; leave out to solve.")] = None,
    power: Annotated[float | None, typer.Option(help="Power; leave out to solve.")] = None,
    n_per_group: Annotated[
        int | None,
        typer.Option(help="By design: " + _by_design("size_name") + "; leave out to solve."),
    ] = None,
    allocation: Annotated[
        float | None, typer.Option(help="By design (default 1): " + _by_design("allocation_name") + ".")
    ] = None,
    design_setting: DesignSettings = None,
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

    def call() -> Any:
        return _solve(
            _design(design, design_setting),
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
        )

    with busy("Solving...", enabled=not as_json):
        solution = run_api("solve", call)
    if as_json:
        emit_json(solution.to_dict())
    else:
        render.make_console().print(render.solution_table(solution))


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


def _inputs(loaded: LoadedScenario) -> list[tuple[str, str]]:
    """The scenario's inputs as rows, the effect prior echoed as the file states it."""
    effect = loaded.model.effect
    stated = None
    if effect.low is not None and effect.high is not None and effect.level is not None:
        stated = (effect.low, effect.high, effect.level)
    return scenario_inputs(loaded.problem, loaded.currency or "", stated)


def _echo(loaded: LoadedScenario) -> dict[str, Any]:
    """The scenario as read, for machine output."""
    return {
        "title": loaded.title,
        "description": loaded.description,
        "file": str(loaded.path),
        "contents": loaded.model.model_dump(mode="json"),
    }


MarkdownFlag = Annotated[bool, typer.Option("--markdown", help="Print a Markdown document.")]
OutputPath = Annotated[Path | None, typer.Option(help="Write to this file (not overwritten unless --force).")]
ForceFlag = Annotated[bool, typer.Option("--force", help="Overwrite --output.")]


def _check_document_flags(command: str, as_json: bool, as_markdown: bool, output: Path | None) -> None:
    """Refuse conflicting output flags before any computing."""
    if as_json and as_markdown:
        _fail(f"decide {command}: choose one of --json and --markdown", 2)
    if output is not None and not (as_json or as_markdown):
        _fail(f"decide {command}: --output needs one of --json or --markdown", 2)


@app.command("optimize")
def optimize_command(
    scenario: ScenarioPath,
    as_json: JsonFlag = False,
    as_markdown: MarkdownFlag = False,
    output: OutputPath = None,
    force: ForceFlag = False,
) -> None:
    """Find the alpha, beta and size that minimise expected loss for a scenario."""
    _check_document_flags("optimize", as_json, as_markdown, output)
    _check_output("optimize", output, force)
    loaded = run_api("optimize", lambda: load_scenario(scenario))
    with busy("Finding the loss-optimal study...", enabled=not (as_json or as_markdown)):
        decision = run_api("optimize", lambda: _optimize(loaded.problem))
    currency = loaded.currency or ""
    if as_json or as_markdown:
        text = (
            json_text({"scenario": loaded.title, **decision_record(decision, currency)})
            if as_json
            else tables.decision_markdown(decision, loaded.title, _inputs(loaded), currency)
        )
        run_api("optimize", lambda: _emit_text(text, output, force))
    else:
        con = render.make_console()
        if decision.action in ("flag-now", "clear-now"):  # lead with it: no study is worth its cost
            con.print(render.literal_text(recommendation(decision, currency), "bold"))
        con.print(render.inputs_table(_inputs(loaded), currency))
        con.print(render.decision_table(decision, loaded.title, currency))
    if not decision.feasible:
        _fail(f"decide optimize: cannot be done: {decision.reason}", 1)


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
    if sum((as_json, as_csv, as_markdown)) > 1:
        _fail("decide compare: choose one of --json, --csv and --markdown", 2)
    if output is not None and not (as_json or as_csv or as_markdown):
        _fail("decide compare: --output needs one of --json, --csv or --markdown", 2)
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
    with busy("Comparing policies...", enabled=not (as_json or as_csv)):
        decisions = run_api("compare", lambda: _compare(loaded.problem, chosen))
    currency = loaded.currency or ""
    if as_json:
        text = json_text(tables.compare_document(decisions, loaded.problem, _echo(loaded), currency))
    elif as_csv:
        text = tables.to_csv(decisions)
    elif as_markdown:
        text = tables.to_markdown(decisions, loaded.title, _inputs(loaded), currency)
    else:
        con = render.make_console()
        if decisions.best_action != "study":  # lead with it: no study is worth its cost
            con.print(render.literal_text(best_action(decisions, currency), "bold"))
        con.print(render.inputs_table(_inputs(loaded), currency))
        con.print(render.compare_table(decisions, loaded.title, currency, con.width, con))
        return
    run_api("compare", lambda: _emit_text(text, output, force))


def _chosen_policies(command: str, policy: list[str] | None, policy_dir: list[Path] | None) -> list[Any]:
    known = run_api(command, lambda: load_policies(policy_dir or ()))
    if not policy:
        return list(known.values())
    unknown = [p for p in policy if p not in known]
    if unknown:
        _fail(f"decide {command}: --policy must be one of {', '.join(known)}, but got {unknown[0]!r}", 2)
    return [known[p] for p in dict.fromkeys(policy)]


@app.command("interpret")
def interpret_command(
    scenario: ScenarioPath,
    data: Annotated[Path, typer.Option("--data", help="Observed data file (TOML, an [observed] table).")],
    policy: Annotated[
        list[str] | None, typer.Option("--policy", help="Policy whose verdict to show (repeatable; default all).")
    ] = None,
    policy_dir: PolicyDirs = None,
    confidence: Annotated[float, typer.Option(help="Confidence of the exact interval.")] = 0.95,
    as_json: JsonFlag = False,
    as_markdown: Annotated[bool, typer.Option("--markdown", help="Print Markdown.")] = False,
    output: Annotated[Path | None, typer.Option(help="Write to this file (not overwritten unless --force).")] = None,
    force: Annotated[bool, typer.Option("--force", help="Overwrite --output.")] = False,
) -> None:
    """Read a finished study's counts: estimate, verdict per policy, probability of harm, what is ruled out."""
    from .decision.interpret import interpret as _interpret
    from .report import interpretation as shown
    from .scenario.observed_file import load_observed

    if as_json and as_markdown:
        _fail("decide interpret: choose one of --json and --markdown", 2)
    if output is not None and not (as_json or as_markdown):
        _fail("decide interpret: --output needs --json or --markdown", 2)
    _check_output("interpret", output, force)
    loaded = run_api("interpret", lambda: load_scenario(scenario))
    counts = run_api("interpret", lambda: load_observed(data, loaded.problem))
    chosen = _chosen_policies("interpret", policy, policy_dir)
    result = run_api("interpret", lambda: _interpret(loaded.problem, counts, chosen, confidence))
    unit = loaded.currency or ""
    if as_json:
        text = json_text(shown.interpretation_record(result, loaded.title, unit))
    elif as_markdown:
        text = shown.to_markdown(result, loaded.title, unit)
    else:
        render.make_console().print(shown.interpretation_table(result, loaded.title, unit))
        return
    run_api("interpret", lambda: _emit_text(text, output, force))


@app.command("audit")
def audit_command(
    design: DesignOption,
    baseline: Annotated[float, typer.Option(help="Baseline, as in 'decide solve'.")],
    alpha: Annotated[float, typer.Option(help="The protocol's significance level.")],
    effect: Annotated[float, typer.Option(help="The effect the protocol was sized for.")],
    p_harm: Annotated[float, typer.Option(help="Prior probability that the exposure is harmful.")],
    per_subject: Annotated[float, typer.Option(help="Study cost per enrolled subject.")],
    power: Annotated[float | None, typer.Option(help="The power the protocol was sized for.")] = None,
    n_per_group: Annotated[int | None, typer.Option(help="The protocol's size (instead of --power).")] = None,
    allocation: Annotated[float | None, typer.Option(help="By design: " + _by_design("allocation_name") + ".")] = None,
    design_setting: DesignSettings = None,
    years: Annotated[float | None, typer.Option(help="Follow-up years per subject.")] = None,
    sides: Annotated[int, typer.Option(help="1 = one-sided test of harm, 2 = two-sided.")] = 1,
    test: Annotated[Test, typer.Option(help="normal, exact, or auto.")] = Test.auto,
    missed_hazard: Annotated[
        float | None, typer.Option(help="The protocol's cost of a missed hazard (with --false-alarm).")
    ] = None,
    false_alarm: Annotated[
        float | None, typer.Option(help="The protocol's cost of a false alarm (with --missed-hazard).")
    ] = None,
    fixed_cost: Annotated[float, typer.Option(help="Fixed study cost, with the protocol's costs.")] = 0.0,
    effect_low: Annotated[
        float | None, typer.Option(help="Lognormal effect prior: low end of its central interval.")
    ] = None,
    effect_high: Annotated[
        float | None, typer.Option(help="Lognormal effect prior: high end of its central interval.")
    ] = None,
    effect_level: Annotated[float, typer.Option(help="Probability inside --effect-low..--effect-high.")] = 0.9,
    unit: Annotated[str, typer.Option(help="Label for costs in the output.")] = "",
    as_json: JsonFlag = False,
    as_markdown: MarkdownFlag = False,
    output: OutputPath = None,
    force: ForceFlag = False,
) -> None:
    """Reveal the value judgments a protocol's alpha and size imply, and judge it by its own costs."""
    _check_document_flags("audit", as_json, as_markdown, output)
    _check_output("audit", output, force)
    costs = _protocol_costs(missed_hazard, false_alarm, fixed_cost, effect_low, effect_high, effect_level)

    def call() -> Any:
        return _audit(
            _design(design, design_setting),
            baseline=baseline,
            alpha=alpha,
            effect=effect,
            p_harm=p_harm,
            per_subject=per_subject,
            power=power,
            n_per_group=n_per_group,
            allocation=allocation,
            years=years,
            sides=sides,
            test=test.value,
            **costs,
        )

    _run_audit(call, unit, as_json, as_markdown, output, force)


class _ProtocolCosts(TypedDict):
    """The protocol's own costs and effect prior, as :func:`decide.decision.audit.audit` takes them."""

    missed_hazard: float | None
    false_alarm: float | None
    fixed: float
    prior: EffectPrior | None


def _protocol_costs(
    missed_hazard: float | None,
    false_alarm: float | None,
    fixed_cost: float,
    effect_low: float | None,
    effect_high: float | None,
    effect_level: float,
) -> _ProtocolCosts:
    """The costs of ``decide audit``; an effect prior needs both ends of its interval and the protocol's costs."""
    if (effect_low is None) != (effect_high is None):
        _fail("decide audit: give both --effect-low and --effect-high (a lognormal effect prior), or neither", 2)
    if (effect_low is not None) and missed_hazard is None:
        _fail(
            "decide audit: an effect prior (--effect-low, --effect-high) needs the protocol's costs "
            "(--missed-hazard and --false-alarm)",
            2,
        )
    prior = None
    if effect_low is not None and effect_high is not None:
        low, high = effect_low, effect_high
        prior = run_api("audit", lambda: EffectPrior.from_interval(low, high, effect_level))
    return {"missed_hazard": missed_hazard, "false_alarm": false_alarm, "fixed": fixed_cost, "prior": prior}


def _run_audit(
    call: Callable[[], Any], unit: str, as_json: bool, as_markdown: bool, output: Path | None, force: bool
) -> None:
    """Run the audit and show it: a table on screen, or JSON or Markdown on stdout or in ``output``."""
    with busy("Auditing the protocol...", enabled=not (as_json or as_markdown)):
        result = run_api("audit", call)
    if as_json or as_markdown:
        text = json_text(result.to_dict()) if as_json else audit_words.markdown(result, unit)
        run_api("audit", lambda: _emit_text(text, output, force))
    else:
        render.make_console().print(render.audit_table(result, unit))


@app.command("policies")
def policies_command(policy_dir: PolicyDirs = None, as_json: JsonFlag = False) -> None:
    """List the policies available to 'decide compare'."""
    known = run_api("policies", lambda: load_policies(policy_dir or ()))
    if as_json:
        from dataclasses import asdict

        emit_json([asdict(p) for p in known.values()])
        return
    con = render.make_console()
    con.print(render.policies_table(list(known.values()), con.width, con))


@app.command("schema")
def schema_command(
    kind: Annotated[str, typer.Argument(help="scenario, policy or observed.")] = "scenario",
) -> None:
    """Print the JSON Schema of scenario (or policy, or observed-data) files."""
    if kind not in ("scenario", "policy", "observed"):
        _fail(f"decide schema: KIND must be observed, scenario or policy, but got {kind!r}", 2)
    if kind == "observed":
        from .scenario.observed_file import observed_json_schema

        schema = observed_json_schema()
    else:
        schema = scenario_json_schema() if kind == "scenario" else policy_json_schema()
    sys.stdout.write(json.dumps(schema, indent=2) + "\n")  # a JSON Schema keeps its own keys ($defs, ...)


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
    shown = one_line(str(path))
    sys.stderr.write(f"wrote {shown}; edit it, then run: decide compare {shown}\n")


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


# --------------------------------------------------------------------------
# sweep and simulate


@contextmanager
def _progress(show: bool, what: str) -> Iterator[Callable[[int, int], None] | None]:
    """A rich progress bar on stderr (only at a terminal), as a ``progress(done, total)`` callback."""
    if not show or not sys.stderr.isatty():
        yield None
        return
    from rich.progress import Progress

    with Progress(console=render.make_console(stderr=True), transient=True) as bar:
        task = bar.add_task(what, total=None)

        def update(done: int, total: int) -> None:
            bar.update(task, completed=done, total=total)

        yield update


def _parse_vary(items: list[str]) -> list[tuple[str, float, float]]:
    out = []
    for item in items:
        name, _, span = item.partition("=")
        lo, sep, hi = span.partition(":")
        try:
            if not (name and sep):
                raise ValueError
            out.append((name.strip(), float(lo), float(hi)))
        except ValueError:
            _fail(f"decide sweep: --vary must look like key.path=low:high, but got {item!r}", 2)
    return out


def _seed(seed: int | None) -> int:
    if seed is not None:
        if seed < 0:
            _fail(f"decide: --seed must be >= 0, but got {seed}", 2)
        return seed
    import numpy as np

    return int(np.random.SeedSequence().entropy) % 2**63  # type: ignore[arg-type]


@app.command("sweep")
def sweep_command(
    scenario: ScenarioPath,
    vary: Annotated[
        list[str] | None,
        typer.Option("--vary", help="Range of an input, key.path=low:high (repeatable), e.g. prior.p_harm=0.05:0.5."),
    ] = None,
    policy: Annotated[
        list[str] | None, typer.Option("--policy", help="Standard to compare (repeatable; default all).")
    ] = None,
    policy_dir: PolicyDirs = None,
    two_way: Annotated[bool, typer.Option("--two-way", help="A grid over two inputs (see --axes).")] = False,
    axes: Annotated[
        str, typer.Option(help="The two inputs of --two-way, x,y.")
    ] = "prior.p_harm,consequences.cost_ratio",
    points: Annotated[int, typer.Option(help="Grid points per axis of --two-way.")] = 25,
    draws: Annotated[
        int | None, typer.Option(help="Probabilistic analysis with this many draws from [uncertainty].")
    ] = None,
    seed: Annotated[int | None, typer.Option(help="Seed of the draws (printed; default: a fresh one).")] = None,
    as_json: JsonFlag = False,
    as_csv: Annotated[bool, typer.Option("--csv", help="Print CSV.")] = False,
) -> None:
    """Does the choice survive doubt? One-way ranges and break-even values, a two-way grid, or draws."""
    from .report import sweep as _show

    _check_sweep_flags(as_json, as_csv, two_way, draws, points)
    spans = _parse_vary(vary or [])
    loaded = run_api("sweep", lambda: load_scenario(scenario))
    problem = loaded.problem
    dists, ranges = _sweep_inputs(loaded, spans)
    unit = loaded.currency or ""
    quiet = as_json or as_csv
    if draws is not None:
        result = _sweep_draws(scenario, problem, dists, draws, seed, policy, policy_dir, quiet)
        _emit(result, as_json, as_csv, _show.probabilistic_csv, lambda: _show.probabilistic_tables(result, unit))
    elif two_way:
        grid = _sweep_grid(problem, axes, ranges, points, quiet)
        _emit(grid, as_json, as_csv, _show.two_way_csv, lambda: _show.two_way_tables(grid))
    else:
        tor = _sweep_tornado(problem, dists, ranges, policy, policy_dir, quiet)
        _emit(tor, as_json, as_csv, _show.tornado_csv, lambda: _show.tornado_tables(tor, unit))


def _check_sweep_flags(as_json: bool, as_csv: bool, two_way: bool, draws: int | None, points: int) -> None:
    """Refuse conflicting or out-of-range options of ``decide sweep`` before any computing."""
    if as_json and as_csv:
        _fail("decide sweep: choose one of --json and --csv", 2)
    if draws is not None and two_way:
        _fail("decide sweep: choose one of --two-way and --draws", 2)
    if draws is not None and draws < 1:
        _fail(f"decide sweep: --draws must be at least 1, but got {draws}", 2)
    if points < 2:
        _fail(f"decide sweep: --points must be at least 2, but got {points}", 2)


def _sweep_inputs(
    loaded: LoadedScenario, spans: list[tuple[str, float, float]]
) -> tuple[dict[str, Distribution], dict[str, InputRange]]:
    """The scenario's input distributions and the --vary ranges, each checked against its problem."""
    from .decision import inputs as _inputs
    from .decision import uncertainty as _unc

    problem = loaded.problem
    model_unc = loaded.model.uncertainty
    dists = model_unc.to_inputs() if model_unc is not None else {}
    ranges = {
        n: run_api("sweep", lambda n=n, lo=lo, hi=hi: _inputs.checked_range(problem, n, lo, hi)) for n, lo, hi in spans
    }
    run_api("sweep", lambda: _unc.check_uncertainty(problem, dists))
    return dists, ranges


def _sweep_draws(
    scenario: Path,
    problem: Problem,
    dists: dict[str, Distribution],
    draws: int,
    seed: int | None,
    policy: list[str] | None,
    policy_dir: list[Path] | None,
    quiet: bool,
) -> Any:
    """The probabilistic analysis: ``draws`` draws from the scenario's [uncertainty] table."""
    from .decision import uncertainty as _unc

    if not dists:
        _fail(f"decide sweep: --draws needs an [uncertainty] table in {scenario}", 2)
    policies = _chosen_policies("sweep", policy, policy_dir)
    used = _seed(seed)
    with _progress(not quiet, "draws") as bar:
        return run_api("sweep", lambda: _unc.probabilistic(problem, dists, draws, used, policies, bar))


def _sweep_grid(problem: Problem, axes: str, ranges: dict[str, InputRange], points: int, quiet: bool) -> Any:
    """The two-way grid over the two inputs named by --axes (over their --vary ranges, or the default ones)."""
    from .decision import inputs as _inputs
    from .decision import sensitivity as _sens

    names = [a.strip() for a in axes.split(",")]
    if len(names) != 2 or names[0] == names[1]:
        _fail(f"decide sweep: --axes must name two different inputs, x,y, but got {axes!r}", 2)
    for n in names:
        run_api("sweep", lambda n=n: _inputs.check_name(problem, n))
    x, y = (ranges.get(n) or run_api("sweep", lambda n=n: _inputs.default_range(problem, n)) for n in names)
    with _progress(not quiet, "grid") as bar:
        return run_api("sweep", lambda: _sens.two_way(problem, x, y, points, bar))


def _sweep_tornado(
    problem: Problem,
    dists: dict[str, Distribution],
    ranges: dict[str, InputRange],
    policy: list[str] | None,
    policy_dir: list[Path] | None,
    quiet: bool,
) -> Any:
    """The one-way analysis of every input, and of any other input given a --vary range."""
    from .decision import inputs as _inputs
    from .decision import sensitivity as _sens

    ranges = _ranges_from_uncertainty(problem, dists, ranges)
    policies = _chosen_policies("sweep", policy, policy_dir)
    names = list(dict.fromkeys([*_inputs.input_names(problem), *ranges]))
    with _progress(not quiet, "inputs") as bar:
        return run_api("sweep", lambda: _sens.tornado(problem, policies, ranges, names, bar))


def _ranges_from_uncertainty(
    problem: Problem, dists: dict[str, Distribution], ranges: dict[str, InputRange]
) -> dict[str, InputRange]:
    """The --vary ranges, and for each other input with a distribution the range it spans (if not a point)."""
    from .decision import inputs as _inputs
    from .scenario.uncertainty import sweep_range

    out = dict(ranges)
    for name, dist in dists.items():
        if name not in out and name in _inputs.input_names(problem):
            lo, hi = sweep_range(dist)
            if hi > lo:
                out[name] = run_api("sweep", lambda n=name, lo=lo, hi=hi: _inputs.checked_range(problem, n, lo, hi))
    return out


def _emit(result: Any, as_json: bool, as_csv: bool, to_csv: Callable[[Any], str], table: Callable[[], Any]) -> None:
    if as_json:
        emit_json({**result.to_dict(), "caution": CAUTION})
    elif as_csv:
        sys.stdout.write(to_csv(result))
    else:
        render.make_console().print(table())


@app.command("simulate")
def simulate_command(
    scenario: ScenarioPath,
    policy: Annotated[str, typer.Option(help="The policy whose design is simulated.")] = "loss-optimal",
    policy_dir: PolicyDirs = None,
    studies: Annotated[int, typer.Option(help="Studies simulated under each hypothesis.")] = 100_000,
    seed: Annotated[int | None, typer.Option(help="Seed of the simulation (printed; default: a fresh one).")] = None,
    as_json: JsonFlag = False,
    as_csv: Annotated[bool, typer.Option("--csv", help="Print CSV.")] = False,
) -> None:
    """Simulate studies of a chosen design and check its false-alarm probability, power and loss."""
    from .decision.optimize import decide_policy
    from .decision.simulate import simulate
    from .report import sweep as _show

    if as_json and as_csv:
        _fail("decide simulate: choose one of --json and --csv", 2)
    if studies < 1:
        _fail(f"decide simulate: --studies must be at least 1, but got {studies}", 2)
    used = _seed(seed)
    loaded = run_api("simulate", lambda: load_scenario(scenario))
    (chosen,) = _chosen_policies("simulate", [policy], policy_dir)
    decision = run_api("simulate", lambda: decide_policy(loaded.problem, chosen))
    result = run_api("simulate", lambda: simulate(loaded.problem, decision, studies, used))
    unit = loaded.currency or ""
    _emit(result, as_json, as_csv, _show.simulation_csv, lambda: _show.simulation_table(result, unit))
    if result.flagged:
        sys.stderr.write(
            "decide simulate: the simulation differs from the analytic values by more than "
            "4 standard errors (see the table)\n"
        )


@app.command("report")
def report_command(
    scenario: ScenarioPath,
    output: Annotated[Path, typer.Option("--output", "-o", help="Report file: FILE.html (self-contained) or FILE.md.")],
    policy: Annotated[
        list[str] | None, typer.Option("--policy", help="Policy to include (repeatable; default all).")
    ] = None,
    policy_dir: PolicyDirs = None,
    quick: Annotated[
        bool, typer.Option("--quick", help="A draft: skip the sensitivity, the draws and the simulation.")
    ] = False,
    seed: Annotated[int | None, typer.Option(help="Seed of the simulation (printed; default: a fresh one).")] = None,
    force: Annotated[bool, typer.Option("--force", help="Overwrite an existing report.")] = False,
    data: Annotated[
        Path | None,
        typer.Option("--data", help="A finished study's observed data (TOML): adds their reading, as 'interpret'."),
    ] = None,
) -> None:
    """Write a report a board can read: question, inputs and sources, recommendation, figures, cautions."""
    if output.suffix.lower() not in (".html", ".htm", ".md"):
        _fail(f"decide report: --output must end in .html or .md, but got {str(output)!r}", 2)
    _check_output("report", output, force)
    loaded = run_api("report", lambda: load_scenario(scenario))
    counts = None
    if data is not None:  # bad data are refused before any computing, so nothing is written
        from .scenario.observed_file import load_observed

        counts = run_api("report", lambda: load_observed(data, loaded.problem))
    chosen = _chosen_policies("report", policy, policy_dir)
    used = _seed(seed)
    from .report.document import gather
    from .report.html import write_report

    steps = (2 if quick else 6) + (counts is not None)
    with _progress(True, "report") as bar:
        done = [0]

        def step(what: str) -> None:
            done[0] += 1
            if bar is not None:
                bar(done[0], steps)

        results = run_api(
            "report", lambda: gather(loaded, chosen, quick, used, step, observed=counts, observed_path=data)
        )
        written = run_api("report", lambda: write_report(results, output, overwrite=force))
    for path in written:
        sys.stderr.write(f"wrote {path}\n")


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

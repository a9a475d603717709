"""Policy files: one TOML file per policy.

A policy file states how alpha and the study size are chosen::

    title = "Conventional science"
    summary = "..."
    [alpha]
    rule = "fixed"          # fixed | loss-optimal | equal-to-beta | posterior | for-power
    value = 0.05            # with rule = "fixed" only
    # posterior_threshold = 0.5   # with rule = "posterior" only
    [power]                 # optional
    target = 0.80           # required power at the design effect
    beta_at_most_alpha = false
    [size]
    rule = "smallest-for-power"   # smallest-for-power | largest-allowed | loss-optimal

The rules are described where they are registered: the alpha rules in
:mod:`decide.decision.rules`, the size rules in :mod:`decide.decision.sizes`.  The policy's name is the
file's stem (``conventional-science.toml`` is ``conventional-science``).

The bundled policies live in the top-level ``policies/`` folder of a source
checkout and are installed as ``decide/_policies`` in a wheel;
:func:`builtin_policy_dir` finds either.  :func:`load_policies` reads them in
:data:`BUILTIN_ORDER`, then any further folders; two policies may not share
a name.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable, Iterable
from importlib.resources.abc import Traversable
from pathlib import Path
from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field

from decide.decision.policies import Policy, alpha_rule_names, size_rule_names
from decide.decision.rules import RULES
from decide.decision.sizes import SIZE_RULES
from decide.errors import DecideError

from ._messages import PolicyFileError, from_core_error
from .bundled import bundled_dir, first_bundled_dir
from .files import read_toml, toml_json_schema, validate_model

#: Display order of the bundled policies: conventional standards first, then
#: standards that let alpha move, then the engine's own choice.  Bundled
#: policies not listed here follow in alphabetical order.
BUILTIN_ORDER: tuple[str, ...] = (
    "conventional-science",
    "strict-science",
    "conventional-fixed-size",
    "precautionary",
    "equal-errors",
    "more-likely-than-not",
    "optimal-alpha-fixed-size",
    "loss-optimal",
)

_NAME = re.compile(r"[a-z0-9]+(-[a-z0-9]+)*")


def _names_from(names: Callable[[], tuple[str, ...]], help_of: Callable[[], str]) -> Callable[[dict[str, Any]], None]:
    """The schema's list of a rule's names and their help, read from the registry when the schema is made."""

    def add(schema: dict[str, Any]) -> None:
        schema["enum"] = list(names())
        schema["description"] = help_of()

    return add


def _alpha_rule_help() -> str:
    return " ".join(f"{name}: {rule.summary}" for name, rule in RULES.items())


def _size_rule_help() -> str:
    return " ".join(f"{name}: {rule.summary}" for name, rule in SIZE_RULES.items())


def _config(title: str) -> ConfigDict:
    return ConfigDict(extra="forbid", frozen=True, strict=True, allow_inf_nan=True, title=title)


class AlphaTable(BaseModel):
    """The [alpha] table: how alpha is chosen."""

    model_config = _config("[alpha]")

    # the name is checked by the core against the registry (any rule registered there is taken)
    rule: str = Field(json_schema_extra=_names_from(alpha_rule_names, _alpha_rule_help))
    value: Annotated[float | None, Field(description='The alpha, with rule = "fixed" only.')] = None
    posterior_threshold: Annotated[
        float | None,
        Field(description='Posterior probability of harm that flags, with rule = "posterior" only.'),
    ] = None


class PowerTable(BaseModel):
    """The [power] table: what power the policy requires."""

    model_config = _config("[power]")

    target: Annotated[
        float | None,
        Field(
            description=(
                "Required power at the design effect (the ratio, or the prior's median). Needed "
                "by size rule smallest-for-power and alpha rule for-power."
            )
        ),
    ] = None
    beta_at_most_alpha: bool = Field(
        default=False,
        description="Also require beta (averaged over the effect prior) not to exceed alpha.",
    )


class SizeTable(BaseModel):
    """The [size] table: how the study size is chosen."""

    model_config = _config("[size]")

    rule: str = Field(json_schema_extra=_names_from(size_rule_names, _size_rule_help))


class PolicyFileModel(BaseModel):
    """A policy file: a standard for choosing alpha and the study size."""

    model_config = _config("decide policy")

    title: Annotated[str, Field(min_length=1, description="A short plain-words name.")]
    summary: Annotated[str, Field(min_length=1, description="One or two sentences on what the policy stands for.")]
    alpha: AlphaTable = Field(description="How alpha is chosen.")
    power: PowerTable = Field(default_factory=PowerTable, description="Required power (optional).")
    size: SizeTable = Field(description="How the study size is chosen.")

    def to_policy(self, name: str) -> Policy:
        return Policy(
            name=name,
            title=self.title,
            summary=self.summary,
            alpha_rule=self.alpha.rule,
            size_rule=self.size.rule,
            alpha=self.alpha.value,
            power=self.power.target,
            posterior_threshold=self.alpha.posterior_threshold,
            beta_at_most_alpha=self.power.beta_at_most_alpha,
        )


def load_policy_file(path: str | os.PathLike[str]) -> Policy:
    """Read one policy file; its name is the file's stem.

    Raises
    ------
    PolicyFileError
        With the one-line message ``<file>: <key.path>: <reason> (got <value>)``.
    """
    file = os.fspath(path)
    name = Path(file).stem
    if not _NAME.fullmatch(name):
        raise PolicyFileError(
            file,
            "",
            "a policy file's name must be lower-case letters and digits joined by "
            f"hyphens, e.g. my-policy.toml (got {name!r})",
        )
    data = read_toml(file, PolicyFileError)
    model: PolicyFileModel = validate_model(file, data, PolicyFileModel, PolicyFileError)
    try:
        return model.to_policy(name)
    except DecideError as e:
        raise from_core_error(file, e, PolicyFileError, prefix=f"policy {name}: ") from None


def _first_policy_dir(packaged: Traversable, checkout: Path) -> Path:
    """The installed copy if there is one, else the source checkout's folder."""
    return first_bundled_dir(packaged, checkout, "policies")


def builtin_policy_dir() -> Path:
    """The folder of the bundled policy files.

    A wheel installs them as ``decide/_policies``; a source checkout or an
    editable install keeps them in ``policies/`` beside the ``decide`` package.
    """
    return bundled_dir("policies")


def _policy_files(folder: Path) -> list[Path]:
    if folder.exists() and not folder.is_dir():
        raise PolicyFileError(
            os.fspath(folder), "", "is a file, not a folder: --policy-dir takes a folder of policy files"
        )
    if not folder.is_dir():
        raise PolicyFileError(os.fspath(folder), "", "no such policy folder")
    return sorted(
        (p for p in folder.iterdir() if p.suffix == ".toml" and not p.name.startswith(".")),
        key=lambda p: p.name,
    )


def _display_order(name: str) -> tuple[int, str]:
    return (BUILTIN_ORDER.index(name) if name in BUILTIN_ORDER else len(BUILTIN_ORDER), name)


def load_policies(extra_dirs: Iterable[str | os.PathLike[str]] = ()) -> dict[str, Policy]:
    """All policies by name: the bundled ones, then those in ``extra_dirs``.

    Bundled policies come in :data:`BUILTIN_ORDER` (others after them,
    alphabetically); each further folder's ``*.toml`` files follow in
    alphabetical order.  Names are unique: a policy whose name is already
    taken (by a bundled policy or another folder's) is refused, naming both
    files, rather than silently replacing the other.

    Raises
    ------
    PolicyFileError
        For a missing folder, a file given as a folder, two policies of one
        name, or the first file that cannot be used.
    """
    policies: dict[str, Policy] = {}
    source: dict[str, Path] = {}
    bundled = sorted(_policy_files(builtin_policy_dir()), key=lambda p: _display_order(p.stem))
    for path in bundled + [p for d in extra_dirs for p in _policy_files(Path(d))]:
        if path.stem in source:
            first = source[path.stem]
            if first.resolve() == path.resolve():
                continue  # the same folder given twice
            raise PolicyFileError(
                os.fspath(path),
                "",
                f"a policy named {path.stem!r} already comes from {first}; "
                "two policies may not share a name (rename one of the files)",
            )
        policy = load_policy_file(path)
        policies[policy.name] = policy
        source[policy.name] = path
    return policies


def policy_json_schema() -> dict[str, Any]:
    """The JSON Schema of a policy file."""
    return toml_json_schema(PolicyFileModel)

"""Policy files: the bundled policies, the folder lookup, overrides, and errors."""

from __future__ import annotations

import os
import re
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

from decide.decision.policies import LOSS_OPTIMAL, Policy
from decide.errors import DecideError
from decide.scenario import (
    BUILTIN_ORDER,
    PolicyFileError,
    ScenarioError,
    builtin_policy_dir,
    load_policies,
    load_policy_file,
    policy_json_schema,
)
from decide.scenario.policy_files import _first_policy_dir

REPO = Path(__file__).resolve().parents[1]

# name: (alpha rule, alpha, power target, posterior threshold, beta <= alpha, size rule)
EXPECTED = {
    "conventional-science": ("fixed", 0.05, 0.80, None, False, "smallest-for-power"),
    "strict-science": ("fixed", 0.05, 0.95, None, False, "smallest-for-power"),
    "conventional-fixed-size": ("fixed", 0.05, None, None, False, "largest-allowed"),
    "precautionary": ("for-power", None, 0.95, None, True, "loss-optimal"),
    "equal-errors": ("equal-to-beta", None, None, None, False, "loss-optimal"),
    "more-likely-than-not": ("posterior", None, None, 0.5, False, "loss-optimal"),
    "optimal-alpha-fixed-size": ("loss-optimal", None, None, None, False, "largest-allowed"),
    "loss-optimal": ("loss-optimal", None, None, None, False, "loss-optimal"),
}


def test_bundled_policies_load_in_display_order() -> None:
    policies = load_policies()
    assert list(policies) == list(BUILTIN_ORDER)
    assert set(EXPECTED) == set(BUILTIN_ORDER)
    assert {p.stem for p in builtin_policy_dir().glob("*.toml")} == set(BUILTIN_ORDER)


@pytest.mark.parametrize("name", list(EXPECTED))
def test_bundled_policy_rules(name: str) -> None:
    p = load_policies()[name]
    got = (p.alpha_rule, p.alpha, p.power, p.posterior_threshold, p.beta_at_most_alpha, p.size_rule)
    assert got == EXPECTED[name]
    assert p.name == name
    assert p.title and p.summary and "\n" not in p.summary
    assert load_policy_file(builtin_policy_dir() / f"{name}.toml") == p


def test_bundled_loss_optimal_is_the_engine_default() -> None:
    assert load_policies()["loss-optimal"] == LOSS_OPTIMAL


def test_bundled_policies_are_the_checkouts_policy_files() -> None:
    # Installed (decide/_policies) or in a checkout (policies/), the files are the checkout's.
    assert not (REPO / "decide" / "_policies").exists()  # the checkout keeps them at the top level only
    found = {p.name: p.read_bytes() for p in builtin_policy_dir().glob("*.toml")}
    assert found == {p.name: p.read_bytes() for p in (REPO / "policies").glob("*.toml")}


def test_installed_copy_is_preferred_then_the_checkout(tmp_path: Path) -> None:
    packaged, checkout = tmp_path / "pkg" / "_policies", tmp_path / "policies"
    checkout.mkdir()
    assert _first_policy_dir(packaged, checkout) == checkout
    packaged.mkdir(parents=True)
    assert _first_policy_dir(packaged, checkout) == packaged
    with pytest.raises(DecideError, match="the bundled policies are missing"):
        _first_policy_dir(tmp_path / "a", tmp_path / "b")


# Building a wheel takes seconds: CI runs it (CI set in the environment), local runs skip it.
@pytest.mark.skipif(not os.environ.get("CI"), reason="builds a wheel; runs where CI is set")
def test_wheel_carries_the_policies_and_finds_them(tmp_path: Path) -> None:
    # Build the wheel as pyproject says, unpack it, and import decide from it
    # ahead of the editable checkout.
    wheel_builder = pytest.importorskip("hatchling.builders.wheel")
    built = wheel_builder.WheelBuilder(str(REPO)).build(directory=str(tmp_path / "dist"), versions=["standard"])
    wheel = next(iter(built))
    with zipfile.ZipFile(wheel) as z:
        names = z.namelist()
        z.extractall(tmp_path / "site")
    assert {f"decide/_policies/{n}.toml" for n in BUILTIN_ORDER} <= set(names)
    assert not any(n.startswith("policies/") for n in names)
    code = (
        "import sys; sys.path.insert(0, sys.argv[1]);"
        "from decide.scenario import builtin_policy_dir, load_policies;"
        "print(builtin_policy_dir()); print(','.join(load_policies()))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code, str(tmp_path / "site")],
        check=True,
        capture_output=True,
        text=True,
    ).stdout.splitlines()
    assert Path(out[0]) == tmp_path / "site" / "decide" / "_policies"
    assert out[1].split(",") == list(BUILTIN_ORDER)


POLICY = """\
title = "Invented test policy"
summary = "For tests."
[alpha]
rule = "fixed"
value = 0.01
[power]
target = 0.9
[size]
rule = "smallest-for-power"
"""


def test_extra_folder_appends_in_order(tmp_path: Path) -> None:
    (tmp_path / "zeta.toml").write_text(POLICY)
    (tmp_path / "alpha-first.toml").write_text(POLICY)
    (tmp_path / "notes.txt").write_text("not a policy")
    (tmp_path / ".hidden.toml").write_text("not = [valid")
    policies = load_policies([tmp_path])
    assert list(policies) == [*BUILTIN_ORDER, "alpha-first", "zeta"]
    assert policies["zeta"] == Policy(
        name="zeta",
        title="Invented test policy",
        summary="For tests.",
        alpha_rule="fixed",
        size_rule="smallest-for-power",
        alpha=0.01,
        power=0.9,
    )


def test_a_name_taken_by_a_bundled_policy_is_refused(tmp_path: Path) -> None:
    (tmp_path / "conventional-science.toml").write_text(POLICY)
    with pytest.raises(PolicyFileError) as info:
        load_policies([tmp_path])
    bundled = builtin_policy_dir() / "conventional-science.toml"
    assert str(info.value) == (
        f"{tmp_path / 'conventional-science.toml'}: a policy named 'conventional-science' already comes "
        f"from {bundled}; two policies may not share a name (rename one of the files)"
    )
    assert load_policies()["conventional-science"].alpha == 0.05  # bundled file untouched


def test_two_folders_may_not_share_a_policy_name(tmp_path: Path) -> None:
    first, second = tmp_path / "a", tmp_path / "b"
    first.mkdir()
    second.mkdir()
    (first / "mine.toml").write_text(POLICY)
    (second / "mine.toml").write_text(POLICY.replace("value = 0.01", "value = 0.02"))
    with pytest.raises(
        PolicyFileError,
        match=re.escape(f"{second / 'mine.toml'}: a policy named 'mine' already comes from {first / 'mine.toml'}"),
    ):
        load_policies([first, second])
    assert load_policies([first, first])["mine"].alpha == 0.01  # one folder given twice is one folder


def test_a_file_given_as_policy_folder(tmp_path: Path) -> None:
    (tmp_path / "mine.toml").write_text(POLICY)
    with pytest.raises(PolicyFileError, match=re.escape(f"{tmp_path / 'mine.toml'}: is a file, not a folder")):
        load_policies([tmp_path / "mine.toml"])


def test_missing_extra_folder(tmp_path: Path) -> None:
    with pytest.raises(PolicyFileError, match=re.escape(f"{tmp_path / 'nope'}: no such policy folder")):
        load_policies([tmp_path / "nope"])


BAD_POLICIES = [
    (
        "syntax",
        POLICY.replace('rule = "fixed"', "rule = fixed"),
        "line 4, column 8",
        r"not valid TOML",
    ),
    (
        "unknown key",
        POLICY.replace("value = 0.01", "valeu = 0.01"),
        "alpha.valeu",
        r"is not a known key; the keys allowed here are rule, value, posterior_threshold",
    ),
    (
        "unknown rule",
        POLICY.replace('rule = "fixed"', 'rule = "strict"'),
        "alpha.rule",
        r"must be one of fixed, loss-optimal, equal-to-beta, posterior, for-power \(got 'strict'\)",
    ),
    (
        "fixed without value",
        POLICY.replace("value = 0.01\n", ""),
        "alpha.value",
        r'is required with rule = "fixed"$',
    ),
    (
        "value with another rule",
        POLICY.replace('rule = "fixed"', 'rule = "loss-optimal"'),
        "alpha.value",
        r"applies to rule = \"fixed\" only, not 'loss-optimal' \(got 0\.01\)",
    ),
    (
        "posterior without threshold",
        POLICY.replace('rule = "fixed"\nvalue = 0.01', 'rule = "posterior"'),
        "alpha.posterior_threshold",
        r'is required with rule = "posterior"',
    ),
    (
        "threshold with another rule",
        POLICY.replace("value = 0.01", "value = 0.01\nposterior_threshold = 0.5"),
        "alpha.posterior_threshold",
        r"applies to rule = \"posterior\" only",
    ),
    (
        "alpha out of range",
        POLICY.replace("value = 0.01", "value = 1.5"),
        "alpha.value",
        r"must be strictly between 0 and 1 \(got 1\.5\)",
    ),
    (
        "power needed",
        POLICY.replace("target = 0.9\n", ""),
        "power.target",
        r"is required with size\.rule = 'smallest-for-power'",
    ),
    (
        "power needed by for-power",
        POLICY.replace('rule = "fixed"\nvalue = 0.01', 'rule = "for-power"')
        .replace("target = 0.9\n", "")
        .replace('"smallest-for-power"', '"loss-optimal"'),
        "power.target",
        r"is required with alpha\.rule = 'for-power'",
    ),
    (
        "power below alpha",
        POLICY.replace("target = 0.9", "target = 0.005"),
        "power.target",
        r"must be above alpha\.value \(0\.01\) \(got 0\.005\)",
    ),
    (
        "wrong type",
        POLICY.replace("target = 0.9", 'target = "high"'),
        "power.target",
        r'must be a number \(got "high"\)',
    ),
    (
        "missing size",
        POLICY.replace('[size]\nrule = "smallest-for-power"\n', ""),
        "size",
        r"is required but missing",
    ),
    ("empty title", POLICY.replace('"Invented test policy"', '""'), "title", r"must not be empty"),
]


@pytest.mark.parametrize(("text", "key", "reason"), [b[1:] for b in BAD_POLICIES], ids=[b[0] for b in BAD_POLICIES])
def test_bad_policy_file_names_its_path_and_key(tmp_path: Path, text: str, key: str, reason: str) -> None:
    path = tmp_path / "bad-policy.toml"
    path.write_text(text)
    for load in (lambda: load_policy_file(path), lambda: load_policies([tmp_path])):
        with pytest.raises(PolicyFileError) as info:
            load()
        message = str(info.value)
        assert "\n" not in message
        assert message.startswith(f"{path}: {key}: "), message
        assert re.search(reason, message[len(f"{path}: {key}: ") :]), message
        assert isinstance(info.value, ScenarioError) and isinstance(info.value, DecideError)


def test_policy_file_name_must_be_a_plain_name(tmp_path: Path) -> None:
    path = tmp_path / "My Policy.toml"
    path.write_text(POLICY)
    with pytest.raises(PolicyFileError, match=re.escape(f"{path}: a policy file's name must be")):
        load_policy_file(path)


def test_policy_json_schema() -> None:
    schema = policy_json_schema()
    assert {"title", "summary", "alpha", "power", "size"} <= set(schema["properties"])
    assert schema["additionalProperties"] is False
    alpha = schema["$defs"]["AlphaTable"]["properties"]
    assert alpha["rule"]["enum"] == [
        "fixed",
        "loss-optimal",
        "equal-to-beta",
        "posterior",
        "for-power",
    ]
    assert all(v.get("description") for v in alpha.values())

"""The board's report: a real HTML parser reads it, every shown number is the engine's, user text is inert.

The HTML is parsed with html5lib in strict mode (any parse error fails);
every SVG is parsed as XML.  Numbers carry ``data-key`` (the result field)
and ``data-value`` (its full value): each is resolved against the result
objects and must equal ``data-value`` exactly, and the shown text, read back
as a number, must agree with it to the three significant digits shown.
"""

from __future__ import annotations

import math
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any

import html5lib  # type: ignore[import-untyped]
import pytest
from typer.testing import CliRunner

from decide.scenario import load_policies, load_scenario, parse_scenario
from decide.scenario._messages import ScenarioError

REPO = Path(__file__).resolve().parents[1]
MILL = REPO / "scenarios" / "mill-dust-uncertain.toml"
SOLVENT = REPO / "scenarios" / "solvent-cohort.toml"
SECTIONS = (
    "question",
    "inputs",
    "recommendation",
    "policies",
    "figures",
    "sensitivity",
    "simulation",
    "justification",
    "cautions",
    "footer",
)
FULL_FIGURES = ("loss-against-alpha", "power-against-effect", "tornado", "action-map", "value-judgments")
SCRIPT = "<script>alert(1)</script>"


def run(*args: str) -> Any:
    from decide.cli import app

    return CliRunner().invoke(app, list(args), env={"COLUMNS": "100"})


@pytest.fixture(scope="module")
def full() -> Any:
    from decide.report.document import gather

    return gather(load_scenario(MILL), list(load_policies(()).values()), quick=False, seed=11)


@pytest.fixture(scope="module")
def full_html(full: Any) -> str:
    from decide.report.html import render_html

    return str(render_html(full))


def parse(text: str) -> Any:
    parser = html5lib.HTMLParser(strict=True, namespaceHTMLElements=False)
    return parser.parse(text)


def test_html_is_well_formed_with_every_section_and_figure(full_html: str) -> None:
    root = parse(full_html)
    ids = {e.get("id") for e in root.iter() if e.get("id")}
    for section in SECTIONS:
        assert section in ids, section
    for name in FULL_FIGURES:
        figure = root.find(f".//figure[@id='figure-{name}']")
        assert figure is not None, name
        assert figure.find("figcaption") is not None and "".join(figure.find("figcaption").itertext()).strip()
        assert "In words:" in "".join(figure.find("p").itertext())
    svgs = re.findall(r"<svg\b.*?</svg>", full_html, flags=re.DOTALL)
    assert len(svgs) == len(FULL_FIGURES)
    for svg in svgs:
        tree = ET.fromstring(svg)  # each SVG is well-formed XML on its own
        assert tree.tag.endswith("svg") and tree.get("aria-label")
    assert root.find(".//script") is None


def test_no_external_reference_anywhere(full_html: str) -> None:
    root = parse(full_html)
    for e in root.iter():
        for name, value in e.attrib.items():
            if name.split("}")[-1] in ("src", "href") or name.endswith("href"):
                assert not re.match(r"\s*(https?:|//|data:text/html)", value), (name, value)
    assert "url(" not in full_html.replace("url(#", "")
    assert "<link" not in full_html and "@import" not in full_html


def _resolve(roots: dict[str, Any], key: str) -> Any:
    head, _, rest = key.partition(".")
    obj = roots[head]
    for name, index in re.findall(r"([^.\[\]]+)|\[(\d+)\]", rest):
        if index:
            obj = obj[int(index)]
        elif isinstance(obj, dict):
            obj = obj[name]
        else:
            obj = getattr(obj, name)
    return obj


def _read_back(text: str) -> float | None:
    """A shown number read back: separators, currency and k/M/bn suffixes undone."""
    t = text.replace(",", "").replace("EUR", "").strip()
    if t == "-":
        return None
    if t == "infinity":
        return math.inf
    scale = {"k": 1e3, "M": 1e6, "bn": 1e9}
    m = re.fullmatch(r"([<>] )?(-?[0-9.]+)(k|M|bn)?", t)
    assert m, text
    return float(m[2]) * scale.get(m[3] or "", 1.0)


def _check_numbers(html: str, r: Any) -> int:
    roots = {
        "decision": r.decision,
        "comparison": r.comparison,
        "tornado": r.tornado,
        "simulation": r.simulation,
        "probabilistic": r.probabilistic,
        "inputs": r.loaded.model,
    }
    checked = 0
    for e in parse(html).iter():
        key = e.get("data-key")
        if key is None:
            continue
        value = _resolve(roots, key)
        shown = e.get("data-value")
        assert shown == ("" if value is None else repr(float(value) if not isinstance(value, int) else value)), key
        back = _read_back("".join(e.itertext()))
        if value is None:
            assert back is None, key
        elif "<" in e.text or ">" in e.text:
            assert abs(value) < 1e-5 or value > 0.999, key
        else:
            assert back == pytest.approx(float(value), rel=5e-3, abs=0.5 if "EUR" in e.text else 1e-12), key
        checked += 1
    return checked


def test_every_number_is_the_engines(full: Any, full_html: str) -> None:
    checked = _check_numbers(full_html, full)
    # inputs, the chosen study, eight policies, six tornado rows, the simulation, the draws
    assert checked > 150
    for key in (
        "decision.alpha",
        "decision.attained_alpha",
        "decision.power",
        "decision.n_per_group",
        "decision.expected_loss",
        "decision.net_benefit",
        "decision.no_study.flag_now",
        "comparison.decisions[7].regret",
        "simulation.power.simulated",
        "tornado.rows[0].low.value",
    ):
        assert f'data-key="{key}"' in full_html, key


def test_numbers_match_on_an_exact_test_draft() -> None:
    from decide.report.document import gather
    from decide.report.html import render_html

    r = gather(load_scenario(SOLVENT), list(load_policies(()).values()), quick=True)
    assert r.decision.test == "exact"
    html = render_html(r)
    assert _check_numbers(html, r) > 80
    root = parse(html)
    assert "Skipped in this draft" in "".join(root.find(".//section[@id='simulation']").itertext())
    assert root.find(".//figure[@id='figure-tornado']") is None


def test_justification_and_cautions(full: Any, full_html: str) -> None:
    text = " ".join("".join(parse(full_html).find(".//section[@id='justification']").itertext()).split())
    conventional = next(d for d in full.comparison if d.policy == "conventional-science")
    from decide.report import numbers as nb

    assert f"as if a missed hazard cost {nb.number(conventional.implied_cost_ratio)} times a false alarm" in text
    assert f"cost {nb.number(full.decision.stated_cost_ratio)} times as much" in text
    assert f"effects below {nb.number(full.decision.detectable_effect)}" in text
    cautions = "".join(parse(full_html).find(".//section[@id='cautions']").itertext())
    for words in (
        "not a decision",
        "responsible body",
        "competent authority",
        "licensed professional",
        "Confounding",
        "misclassification",
        "normal approximation",
    ):
        assert words in cautions, words
    footer = "".join(parse(full_html).find(".//footer").itertext())
    import hashlib

    assert hashlib.sha256(MILL.read_bytes()).hexdigest() in footer
    assert "seed 11" in footer and "decide 0.1.0" in footer


def _hostile(tmp_path: Path) -> tuple[Path, Path]:
    text = SOLVENT.read_text()
    text = re.sub(r"^title = .*$", f'title = "{SCRIPT} title"', text, flags=re.M)
    text = re.sub(r'description = """.*?"""', f'description = "{SCRIPT} description"', text, flags=re.S)
    text += f'\n[sources]\n"prior.p_harm" = "{SCRIPT} source"\n'
    scenario = tmp_path / "hostile.toml"
    scenario.write_text(text)
    policies = tmp_path / "policies"
    policies.mkdir()
    (policies / "hostile.toml").write_text(
        f'title = "{SCRIPT} policy"\nsummary = "{SCRIPT} summary"\n[alpha]\nrule = "fixed"\nvalue = 0.05\n'
        '[power]\ntarget = 0.8\n[size]\nrule = "smallest-for-power"\n'
    )
    return scenario, policies


def test_text_from_files_is_shown_as_text(tmp_path: Path) -> None:
    scenario, policies = _hostile(tmp_path)
    out = tmp_path / "r.html"
    res = run("report", str(scenario), "-o", str(out), "--quick", "--policy-dir", str(policies))
    assert res.exit_code == 0, res.output
    html = out.read_text()
    root = parse(html)
    assert root.find(".//script") is None and "<script>" not in html
    text = "".join(root.itertext())
    for field in ("title", "description", "source", "policy", "summary"):
        assert f"{SCRIPT} {field}" in text, field
    md = tmp_path / "r.md"
    res = run("report", str(scenario), "-o", str(md), "--quick", "--policy-dir", str(policies))
    assert res.exit_code == 0, res.output
    assert "<script>" not in md.read_text()


def test_sources_are_shown_and_unknown_keys_refused() -> None:
    text = SOLVENT.read_text() + '\n[sources]\n"prior.p_harm" = "expert panel, 2026 (invented)"\n'
    loaded = parse_scenario(text, "s.toml")
    assert loaded.model.sources == {"prior.p_harm": "expert panel, 2026 (invented)"}
    from decide.report.page import input_rows

    rows = {row["key"]: row["source"] for row in input_rows(_stub(loaded))}
    assert rows["prior.p_harm"] == "expert panel, 2026 (invented)"
    assert rows["consequences.false_alarm"] == "no source given"
    with pytest.raises(ScenarioError, match=r"sources\.prior\.p_hram: names no input"):
        parse_scenario(SOLVENT.read_text() + '\n[sources]\n"prior.p_hram" = "x"\n', "s.toml")


def _stub(loaded: Any) -> Any:
    class Stub:
        pass

    s = Stub()
    s.loaded = loaded  # type: ignore[attr-defined]
    return s


def test_markdown_links_its_figures_relatively(tmp_path: Path) -> None:
    out = tmp_path / "board.md"
    res = run("report", str(SOLVENT), "-o", str(out), "--quick")
    assert res.exit_code == 0, res.output
    text = out.read_text()
    links = re.findall(r"!\[[^\]]*\]\(([^)]+)\)", text)
    assert links and all(link.startswith("board_figures/") for link in links)
    for link in links:
        ET.parse(tmp_path / link)  # each figure file is a well-formed SVG
    for heading in (
        "The question",
        "Inputs and their sources",
        "Recommendation",
        "policies side by side",
        "Figures",
        "survive doubt",
        "Simulation check",
        "Justification",
        "Assumptions and cautions",
    ):
        assert heading in text, heading


@pytest.mark.parametrize("where", ["missing-folder", "a-folder", "exists"])
def test_unwritable_output_is_refused_before_computing(tmp_path: Path, where: str) -> None:
    target = {"missing-folder": tmp_path / "nope" / "r.html", "a-folder": tmp_path, "exists": tmp_path / "old.html"}
    path = target[where]
    if where == "exists":
        path.write_text("previous report")
    res = run(
        "report", str(tmp_path / "no-such-scenario.toml"), "-o", str(path) if where != "a-folder" else str(path) + "/"
    )
    assert res.exit_code == 2
    assert "Traceback" not in res.output and "no-such-scenario" not in res.output  # refused before reading
    if where == "exists":
        assert path.read_text() == "previous report"


def test_output_must_be_html_or_markdown(tmp_path: Path) -> None:
    res = run("report", str(SOLVENT), "-o", str(tmp_path / "r.pdf"))
    assert res.exit_code == 2 and "--output must end in .html or .md" in res.output


def test_help_does_not_import_matplotlib_or_jinja2() -> None:
    code = (
        "import sys\nfrom decide.cli import main\nsys.argv = ['decide', '--help']\ntry:\n    main()\n"
        "except SystemExit:\n    pass\nprint('matplotlib' in sys.modules, 'jinja2' in sys.modules)\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        check=True,
        env={"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"},
    )
    assert out.stdout.strip().splitlines()[-1] == "False False"


def test_the_matched_design_gets_its_simulation(monkeypatch: pytest.MonkeyPatch) -> None:
    """The matched design: its design settings are shown as inputs and its simulation is drawn and checked."""
    from dataclasses import replace

    from decide.decision.simulate import SIMULATED, design_name, simulate
    from decide.report.document import SIMULATED_STUDIES, gather
    from decide.report.html import render_html

    matched = REPO / "scenarios" / "quillmere-matched.toml"
    loaded = load_scenario(matched)
    assert design_name(loaded.problem) == "matched-case-control" and "matched-case-control" in SIMULATED
    r = gather(loaded, list(load_policies(()).values()), quick=True)
    root = parse(render_html(r))
    assert _check_numbers(render_html(r), r) > 20
    keys = {e.get("data-key") for e in root.iter() if e.get("data-key")}
    assert "inputs.study.design_settings.correlation" in keys
    # the full report's simulation, drawn as gather draws it (the rest of the full report is not needed here)
    sim = simulate(loaded.problem, r.decision, SIMULATED_STUDIES, 11)
    full = replace(r, quick=False, seed=11, simulation=sim)
    html = render_html(full)
    text = "".join(parse(html).find(".//section[@id='simulation']").itertext())
    assert "McNemar" in text and "no simulation" not in text
    assert 'data-key="simulation.power.simulated"' in html and _check_numbers(html, full) > 25
    # a design the simulation could not draw would still get its report, with a sentence instead
    monkeypatch.setattr("decide.report.html.SIMULATED", ())
    text = "".join(parse(render_html(replace(r, quick=False))).find(".//section[@id='simulation']").itertext())
    assert "cannot draw this study design" in text


@pytest.mark.parametrize("stem", ["trade-case-control", "quillmere-matched"])
def test_markdown_keeps_the_spaces_around_numbers(stem: str, tmp_path: Path) -> None:
    """Sentences and cells built from pieces read as the screen does: "cost 0.934 times", "2.27" (not
    "cost0.934times", nor "2.27 to 2.27" for a range whose ends round alike)."""
    from decide.report.document import gather
    from decide.report.html import render_markdown
    from decide.report.numbers import ratio_range

    results = gather(load_scenario(REPO / "scenarios" / f"{stem}.toml"), list(load_policies(()).values()), quick=True)
    text, _ = render_markdown(results, tmp_path / "board.md")
    prose = [re.sub(r"`[0-9a-f]{64}`", "", line) for line in text.splitlines() if "](" not in line]  # less digests
    glued = [m.group(0) for line in prose for m in re.finditer(r"[A-Za-z]{2,}\d[\d.,]*|\d[\d.,]*[a-z]{2,}", line)]
    assert not glued, glued
    implied = [ratio_range(d.implied_cost_ratio, d.implied_cost_ratio_range) for d in results.comparison if d.feasible]
    cells = [[c.strip() for c in line.strip().strip("|").split("|")] for line in prose if line.startswith("| ")]
    rows = [c for c in cells if len(c) == 12 and c[1] == "run the study"]  # the policies side by side
    assert [row[-1] for row in rows] == implied

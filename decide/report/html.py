"""A report an ethics board can read: one self-contained HTML file, or Markdown with SVG files beside it.

:func:`render_html` fills the packaged jinja2 template (autoescape on: every
text from a file is escaped) with the page data of :mod:`.page`, the
justification of :mod:`.justify`, the figures of :mod:`.figures` inline and
the style sheet inline; the result fetches nothing and needs no script.
:func:`render_markdown` gives the same sections in Markdown, with the
figures as SVG files in a folder beside it (``FILE_figures/``).
jinja2 and matplotlib are imported only here, when a report is made.
"""

from __future__ import annotations

import os
from importlib import resources
from pathlib import Path
from typing import Any

from ..decision.simulate import SIMULATED, design_name
from ..scenario import write_text_atomic
from .after_study import after_study
from .document import SIMULATED_STUDIES, ReportResults
from .figures import Figure, draw_all
from .justify import justification
from .page import Num, cautions, chosen, input_rows, num, policy_rows, probabilistic_rows, simulation_rows, tornado_rows
from .text import CAUTION, markdown_literal


def _exact(value: Any) -> str:
    """A number's full value for ``data-value`` (``repr`` of a float round-trips)."""
    return "" if value is None else repr(value)


def _md(text: Any) -> str:
    """User text for Markdown: escaped, and no raw HTML."""
    return markdown_literal(text)


def _md_piece(text: Any) -> str:
    """A piece of a Markdown sentence or cell: as :func:`_md`, keeping one space at either edge it had."""
    t = str(text)
    return (" " if t[:1].isspace() else "") + markdown_literal(t) + (" " if t[-1:].isspace() else "")


def _environment(autoescape: bool) -> Any:
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("decide.report", "templates"),
        autoescape=autoescape,
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
    )
    env.tests["num"] = lambda x: isinstance(x, Num)
    env.filters["exact"] = _exact
    env.filters["md"] = _md
    env.filters["md_piece"] = _md_piece
    return env


def context(r: ReportResults, figures: list[Figure], figure_dir: str = "") -> dict[str, Any]:
    """Everything the templates show."""
    s = r.simulation
    return {
        "title": r.loaded.title,
        "description": r.loaded.description.strip(),
        "caution": CAUTION,
        "quick": r.quick,
        "simulable": design_name(r.loaded.problem) in SIMULATED,
        "inputs": input_rows(r),
        "chosen": chosen(r),
        "policies": policy_rows(r),
        "figures": figures,
        "figure_dir": figure_dir,
        "tornado": tornado_rows(r),
        "draws": probabilistic_rows(r),
        "simulation": simulation_rows(r),
        "sim_studies": num("simulation.studies", s.studies if s else SIMULATED_STUDIES, "count"),
        "sim_method": s.method if s else "",
        "seed": r.seed,
        "justification": justification(r),
        "cautions": cautions(r),
        "after": after_study(r),
        "version": r.version,
        "date": r.date,
        "sha256": r.sha256,
        "file_name": r.loaded.path.name,
    }


def render_html(r: ReportResults) -> str:
    """The report as one self-contained HTML document."""
    css = (resources.files("decide.report") / "templates" / "report.css").read_text(encoding="utf-8")
    return str(_environment(True).get_template("report.html.j2").render(css=css, **context(r, draw_all(r))))


def figure_dir_for(path: str | os.PathLike[str]) -> Path:
    """The folder of a Markdown report's figures: ``FILE_figures`` beside ``FILE.md``."""
    p = Path(path)
    return p.with_name(p.stem + "_figures")


def render_markdown(r: ReportResults, path: str | os.PathLike[str]) -> tuple[str, list[Figure]]:
    """The report in Markdown for ``path``, and the figures to write beside it."""
    figures = draw_all(r)
    folder = figure_dir_for(path).name
    return str(_environment(False).get_template("report.md.j2").render(**context(r, figures, folder))), figures


def write_report(r: ReportResults, path: str | os.PathLike[str], overwrite: bool = True) -> list[Path]:
    """Write the report to ``path`` (HTML unless it ends in ``.md``), each file atomically; the files written."""
    target = Path(path)
    if target.suffix.lower() != ".md":
        return [write_text_atomic(target, render_html(r), overwrite=overwrite)]
    text, figures = render_markdown(r, target)
    folder = figure_dir_for(target)
    folder.mkdir(exist_ok=True)
    written = [write_text_atomic(folder / f"{f.name}.svg", f.svg + "\n", overwrite=True) for f in figures]
    return [*written, write_text_atomic(target, text, overwrite=overwrite)]

"""The report's figures: matplotlib drawings as self-contained SVG text.

matplotlib is imported here, inside :func:`draw_all`, only when a report is
made.  Colours are the Okabe-Ito palette, told apart by people with the
common colour-vision deficiencies; lines also differ in style and marker.
Every figure comes with a caption and a text alternative that says what it
shows in words.  Text in the SVG is drawn as paths, so the figure needs no
font and fetches nothing.

References
----------
.. [1] Okabe, M. and Ito, K. (2008). Color Universal Design (CUD): how to
   make figures and presentations that are friendly to colorblind people
   (the eight-colour palette).
"""

from __future__ import annotations

import io
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from . import numbers as nb
from .document import ReportResults

#: Okabe-Ito: black, orange, sky blue, bluish green, yellow, blue, vermillion, reddish purple.
PALETTE = ("#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7")
LINESTYLES = ("-", "--", "-.", ":")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "*")
#: Colours of the actions on the two-way map.
ACTION_COLOURS = {"study": "#56B4E9", "flag-now": "#E69F00", "clear-now": "#009E73", "not-available": "#999999"}
ACTION_WORDS = {
    "study": "run the study",
    "flag-now": "flag now",
    "clear-now": "clear now",
    "not-available": "not available",
}


@dataclass(frozen=True)
class Figure:
    """One drawn figure: ``svg`` is the inline SVG element, ``name`` its file stem."""

    name: str
    title: str
    caption: str
    alt: str
    svg: str


def _svg(fig: Any, alt: str) -> str:
    """The figure as an SVG element with no XML prolog, metadata or external reference."""
    import matplotlib.pyplot as plt
    from markupsafe import escape

    buf = io.StringIO()
    fig.savefig(
        buf, format="svg", bbox_inches="tight", metadata={"Date": None, "Creator": None, "Format": None, "Type": None}
    )
    plt.close(fig)
    text = buf.getvalue()
    text = text[text.index("<svg") :]
    text = re.sub(r"<metadata>.*?</metadata>", "", text, flags=re.DOTALL)
    return text.replace("<svg ", f'<svg role="img" aria-label="{escape(alt)}" ', 1)


def _setup() -> Any:
    import matplotlib
    from cycler import cycler

    matplotlib.use("svg")
    matplotlib.rcParams.update(
        {
            "svg.hashsalt": "decide",
            "svg.fonttype": "path",
            "font.size": 9,
            "axes.prop_cycle": cycler(color=PALETTE[1:] + PALETTE[:1]),
        }
    )
    import matplotlib.pyplot as plt

    return plt


def _money_axis(axis: Any) -> None:
    """Money ticks in the report's own compact form (``14.8M``), never with an e-notation offset."""
    from matplotlib.ticker import FuncFormatter

    axis.set_major_formatter(FuncFormatter(lambda v, _: nb.money(v, compact=True)))


def _loss(plt: Any, r: ReportResults) -> Figure | None:
    c, cur = r.loss_curve, r.loaded.currency
    if c is None:
        return None
    fig, ax = plt.subplots(figsize=(6.4, 3.6))
    ax.plot(
        c.x,
        c.y,
        color=PALETTE[5],
        lw=1.8,
        drawstyle="steps-post" if r.decision.test == "exact" else "default",
        label=f"at {nb.count(r.decision.n_per_group)} per group",
    )
    shown = []
    for i, d in enumerate(r.comparison):
        if d.attained_alpha is None or not d.feasible:
            continue
        y = float(np.interp(d.attained_alpha, c.x, c.y))
        ax.plot([d.attained_alpha], [y], MARKERS[i % 8], color=PALETTE[(i + 1) % 8], ms=7, mec="black", label=d.title)
        shown.append(f"{d.title} at attained alpha {nb.probability(d.attained_alpha)}")
    ax.set_xscale("log")
    ax.set_xlabel("attained alpha (false-alarm probability)")
    ax.set_ylabel(f"expected loss ({cur})" if cur else "expected loss")
    _money_axis(ax.yaxis)
    ax.legend(fontsize=7, loc="best")
    ax.grid(alpha=0.3)
    low = int(np.argmin(c.y))
    alt = (
        f"A curve of expected loss against the attained alpha for a study of {nb.count(r.decision.n_per_group)} "
        f"per group; it is lowest at attained alpha {nb.probability(c.x[low])} "
        f"(loss {nb.money(c.y[low], cur)}). Marked: " + "; ".join(shown) + "."
    )
    return Figure(
        "loss-against-alpha",
        "Expected loss against the attained alpha",
        "Expected loss (missed hazards, false alarms and the study) at the loss-optimal size, as the "
        "alpha varies; each policy's alpha is marked on the curve (the policy's own size may differ).",
        alt,
        _svg(fig, alt),
    )


def _power(plt: Any, r: ReportResults) -> Figure | None:
    effects, lines, density = r.power
    if not lines:
        return None
    fig, ax = plt.subplots(figsize=(6.4, 3.6))
    said = []
    for i, c in enumerate(lines):
        ax.plot(c.x, c.y, LINESTYLES[i % 4], color=PALETTE[(i + 1) % 8], lw=1.6, label=c.label)
        said.append(
            f"{c.label}: power {nb.probability(np.interp(r.decision.design_effect, c.x, c.y))} at the design effect"
        )
    e = r.loaded.problem.effect
    if density.max() > 0:
        ax2 = ax.twinx()
        ax2.fill_between(effects, density, color="#999999", alpha=0.3, lw=0)
        ax2.set_yticks([])
        ax2.set_ylabel("prior density of the effect (shaded)")
        prior = f"The prior's density is shaded beneath, centred on {nb.number(e.median)}."
    else:
        ax.axvline(e.median, color="#999999", lw=4, alpha=0.5, label="the effect if harmful")
        prior = f"The effect if harmful, {nb.number(e.median)}, is marked by a grey band."
    ax.set_xlabel("effect (" + _effect_name(r) + ")")
    ax.set_ylabel("power")
    ax.set_ylim(0, 1.02)
    ax.legend(fontsize=7, loc="lower right")
    ax.grid(alpha=0.3)
    alt = "Power against the effect for each available policy's design. " + "; ".join(said) + ". " + prior
    return Figure(
        "power-against-effect",
        "Power against the effect",
        "Probability that each available policy's study flags the exposure, by the true effect; the "
        "prior for the effect if harmful is shown beneath.",
        alt,
        _svg(fig, alt),
    )


def _effect_name(r: ReportResults) -> str:
    from ..designs import get_design

    return get_design(r.decision.design).effect_name


def _tornado(plt: Any, r: ReportResults) -> Figure | None:
    t, cur = r.tornado, r.loaded.currency
    if t is None or not t.rows:
        return None
    rows = list(reversed(t.rows))
    fig, ax = plt.subplots(figsize=(6.4, 0.45 * len(rows) + 1.2))
    centre = t.central.expected_loss or 0.0
    said = []
    for i, w in enumerate(rows):
        lo, hi = w.low.expected_loss or centre, w.high.expected_loss or centre
        ax.barh(i, lo - centre, left=centre, color=PALETTE[5], height=0.6)
        ax.barh(i, hi - centre, left=centre, color=PALETTE[1], height=0.6, hatch="//")
        for th in w.thresholds:
            if th.kind == "action" and th.value is not None and th.losses is not None:
                ax.plot([th.losses[0]], [i], "kD", ms=6)
                ax.annotate(
                    f"break-even {nb.number(th.value)}",
                    (th.losses[0], i),
                    xytext=(4, 6),
                    textcoords="offset points",
                    fontsize=7,
                )
        said.append(
            f"{w.input}: {nb.money(lo, cur)} at {nb.number(w.low.value)} to {nb.money(hi, cur)} at "
            f"{nb.number(w.high.value)}"
        )
    ax.axvline(centre, color="black", lw=1)
    _money_axis(ax.xaxis)
    ax.set_yticks(range(len(rows)), [w.input for w in rows], fontsize=8)
    ax.set_xlabel(f"expected loss of the loss-optimal choice ({cur})" if cur else "expected loss")
    from matplotlib.patches import Patch

    ax.legend(
        handles=[
            Patch(color=PALETTE[5], label="input at its low end"),
            Patch(facecolor=PALETTE[1], hatch="//", label="input at its high end"),
        ],
        fontsize=7,
    )
    alt = (
        "Tornado of the one-way sensitivity, inputs ordered by swing; break-even values (where the "
        "recommended action changes) are marked by black diamonds. " + "; ".join(said) + "."
    )
    return Figure(
        "tornado",
        "One-way sensitivity (tornado)",
        "Expected loss of the loss-optimal choice as each input moves over its range, the others held; "
        "a diamond marks a break-even value where the recommended action changes.",
        alt,
        _svg(fig, alt),
    )


def _map(plt: Any, r: ReportResults) -> Figure | None:
    g = r.grid
    if g is None:
        return None
    from matplotlib.colors import ListedColormap
    from matplotlib.patches import Patch

    from ..decision.inputs import value_of

    names = list(ACTION_COLOURS)
    codes = np.array([[names.index(a) for a in row] for row in g.action], dtype=float)
    fig, ax = plt.subplots(figsize=(6.4, 4.0))
    x, y = np.asarray(g.x_values), np.asarray(g.y_values)
    ax.pcolormesh(
        x,
        y,
        codes,
        cmap=ListedColormap(list(ACTION_COLOURS.values())),
        vmin=-0.5,
        vmax=len(names) - 0.5,
        shading="nearest",
    )
    px, py = value_of(r.loaded.problem, g.x), value_of(r.loaded.problem, g.y)
    ax.plot([px], [py], "k*", ms=14, mec="white", label="the scenario")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlabel(g.x)
    ax.set_ylabel(g.y + " (missed hazard : false alarm)")
    seen = [a for a in names if (codes == names.index(a)).any()]
    ax.legend(
        handles=[Patch(color=ACTION_COLOURS[a], label=ACTION_WORDS[a]) for a in seen] + [ax.lines[0]],
        fontsize=7,
        loc="upper left",
    )
    share = ", ".join(
        f"{ACTION_WORDS[a]} in {int((codes == names.index(a)).sum())} of {codes.size} cells" for a in seen
    )
    alt = (
        f"Map of the recommended action over {g.x} ({nb.number(x.min())} to {nb.number(x.max())}) and {g.y} "
        f"({nb.number(y.min())} to {nb.number(y.max())}): {share}. The scenario's point "
        f"({nb.number(px)}, {nb.number(py)}) is marked with a star."
    )
    return Figure(
        "action-map",
        "Recommended action over the prior and the cost ratio",
        "The loss-optimal action at each pair of values of the prior probability of harm and the "
        "cost ratio, other inputs held; the star is the scenario as stated.",
        alt,
        _svg(fig, alt),
    )


def _judgments(plt: Any, r: ReportResults) -> Figure | None:
    c = r.alpha_curve
    if c is None:
        return None
    fig, ax = plt.subplots(figsize=(6.4, 3.8))
    ok = np.isfinite(c.y) & (c.y > 0)
    ax.plot(c.x[ok], c.y[ok], color=PALETTE[5], lw=1.8, label="loss-optimal attained alpha")
    said = []
    for i, d in enumerate(r.comparison):
        if d.implied_cost_ratio is None or d.attained_alpha is None or not d.feasible:
            continue
        ax.plot(
            [d.implied_cost_ratio],
            [d.attained_alpha],
            MARKERS[i % 8],
            color=PALETTE[(i + 1) % 8],
            ms=7,
            mec="black",
            label=d.title,
        )
        said.append(f"{d.title} implies {nb.number(d.implied_cost_ratio)}")
    ax.axvline(r.decision.stated_cost_ratio, color="black", ls=":", lw=1.2, label="the stated ratio")
    ax.set_xscale("log")
    ax.set_yscale("log")
    marked = [d.attained_alpha for d in r.comparison if d.attained_alpha]
    ax.set_ylim(bottom=max(1e-5, min(marked, default=1e-3) / 20))
    ax.set_xlabel("cost ratio, missed hazard : false alarm")
    ax.set_ylabel("attained alpha")
    ax.legend(fontsize=7, loc="best")
    ax.grid(alpha=0.3)
    alt = (
        "The loss-optimal attained alpha falls as a missed hazard is made costlier relative to a false alarm. "
        f"The stated ratio is {nb.number(r.decision.stated_cost_ratio)}. Each policy sits at the ratio its "
        "alpha implies: " + "; ".join(said) + "."
    )
    return Figure(
        "value-judgments",
        "Which value judgment each standard makes",
        "The loss-optimal attained alpha against the cost ratio (missed hazard : false alarm); each policy "
        "is marked at the cost ratio for which its alpha would be optimal, the dotted line is the ratio "
        "the scenario states.",
        alt,
        _svg(fig, alt),
    )


def draw_all(r: ReportResults) -> list[Figure]:
    """Every figure the results allow, in report order."""
    plt = _setup()
    drawn = [f(plt, r) for f in (_loss, _power, _tornado, _map, _judgments)]
    return [f for f in drawn if f is not None]

"""The files bundled with decide: policies and invented example scenarios.

A wheel installs them inside the package, as ``decide/_policies`` and
``decide/_scenarios`` (``pyproject.toml`` force-includes the top-level
``policies/`` and ``scenarios/`` folders there); a source checkout or an
editable install keeps them in those top-level folders beside the ``decide``
package.  :func:`bundled_dir` finds either, the installed copy first.

The example scenarios are invented demonstration data; ``decide new PATH
--example NAME`` writes one out so that an installed user has them too.
"""

from __future__ import annotations

from importlib import resources
from importlib.resources.abc import Traversable
from pathlib import Path
from typing import Literal

from decide.errors import DecideError

Kind = Literal["policies", "scenarios"]


def first_bundled_dir(packaged: Traversable, checkout: Path, kind: str) -> Path:
    """The installed copy if there is one, else the source checkout's folder."""
    if isinstance(packaged, Path) and packaged.is_dir():
        return packaged
    if checkout.is_dir():
        return checkout
    raise DecideError(f"the bundled {kind} are missing: looked in {packaged} and {checkout}", (kind,))


def bundled_dir(kind: Kind) -> Path:
    """The folder of the bundled ``kind`` files (``policies`` or ``scenarios``)."""
    return first_bundled_dir(
        resources.files("decide") / f"_{kind}",
        Path(__file__).resolve().parents[2] / kind,
        kind,
    )


def example_names() -> list[str]:
    """Names of the bundled example scenarios (file stems), sorted."""
    folder = bundled_dir("scenarios")
    return sorted(p.stem for p in folder.glob("*.toml") if not p.name.startswith("."))


def example_path(name: str) -> Path:
    """The bundled example scenario called ``name``.

    Raises
    ------
    DecideError
        If there is no such example; the message lists the names there are.
    """
    names = example_names()
    if name not in names:
        raise DecideError(f"example must be one of {', '.join(names)}, but got {name!r}", ("example",))
    return bundled_dir("scenarios") / f"{name}.toml"


def example_text(name: str) -> str:
    """The text of the bundled example scenario ``name`` (see :func:`example_path`)."""
    return example_path(name).read_text(encoding="utf-8")


__all__ = ["bundled_dir", "example_names", "example_path", "example_text", "first_bundled_dir"]

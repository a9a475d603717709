"""Shared test settings: what is tested, a deterministic hypothesis profile, a fixed terminal width.

The suite tests the ``decide`` that Python imports: after ``pip install .`` the
installed copy, in a development set-up the editable install or ``PYTHONPATH``.
``python -m pytest`` puts the working folder first on ``sys.path``, which in a
checkout would shadow an installed copy with the checkout's ``decide/``; that
entry is taken off again here, before any test imports ``decide`` (tests run
with ``--import-mode=importlib``, so pytest itself adds no folder of ours).
The first process records where ``decide`` is then found; pytest-xdist's
workers, which put the working folder first again, follow that record.
(``tests/test_installed.py`` fails under ``CI=true`` if the checkout is tested.)
"""

from __future__ import annotations

import importlib.util
import os
import sys
from pathlib import Path

from hypothesis import HealthCheck, settings

CHECKOUT = Path(__file__).resolve().parents[1]
#: Set by the first pytest process: the folder ``decide`` is imported from.
_UNDER_TEST = "DECIDE_TESTS_IMPORT_FROM"


def _is_checkout(entry: str) -> bool:
    return Path(entry or os.curdir).resolve() == CHECKOUT


def _keep_the_checkout_off_the_path() -> None:
    """Import ``decide`` from where Python would without ``python -m``'s working folder."""
    if "decide" in sys.modules:
        return
    chosen = os.environ.get(_UNDER_TEST)
    if chosen is None:  # the first process
        if not sys.flags.safe_path and sys.path and _is_checkout(sys.path[0]):
            del sys.path[0]
        spec = importlib.util.find_spec("decide")
        origin = spec.origin if spec is not None else None
        os.environ[_UNDER_TEST] = chosen = str(Path(origin).resolve().parents[1]) if origin else ""
    elif chosen and Path(chosen) != CHECKOUT:  # a worker; the checkout was not chosen
        sys.path[:] = [entry for entry in sys.path if not _is_checkout(entry)]


_keep_the_checkout_off_the_path()
# The tests' shared helpers (brute_force, decision_helpers) are imported by name.
sys.path.insert(0, str(Path(__file__).resolve().parent))


def pytest_report_header() -> str:
    import decide

    return f"decide {decide.__version__} imported from {Path(decide.__file__).parent}"


# Rich and typer wrap to the terminal width; pin it so CLI output does not
# depend on where the tests run.
os.environ["COLUMNS"] = "120"

settings.register_profile(
    "ci",
    derandomize=True,
    max_examples=40,
    deadline=None,
    print_blob=True,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.load_profile("ci")

"""Shared test settings: what is tested, a deterministic hypothesis profile, a fixed terminal width.

The suite tests the ``decide`` that Python imports: after ``pip install .`` the
installed copy, in a development set-up the editable install or ``PYTHONPATH``.
``python -m pytest`` puts the working folder first on ``sys.path``, which in a
checkout would shadow an installed copy with the checkout's ``decide/``; that
entry is taken off again here, before any test imports ``decide`` (tests run
with ``--import-mode=importlib``, so pytest itself adds no folder of ours).
(``tests/test_installed.py`` fails under ``CI=true`` if the checkout is tested.)
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

from hypothesis import HealthCheck, settings

CHECKOUT = Path(__file__).resolve().parents[1]


def _drop_working_folder() -> None:
    """Take off ``sys.path[0]`` if it is the checkout put there by ``python -m`` (not ``PYTHONPATH``)."""
    if sys.flags.safe_path or not sys.path or "decide" in sys.modules:
        return
    first = sys.path[0]
    if Path(first or os.curdir).resolve() == CHECKOUT:
        del sys.path[0]


_drop_working_folder()
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

"""Shared test settings: hypothesis profiles and the rule that ngspice tests never skip in CI."""

from __future__ import annotations

import os

import pytest
from hypothesis import HealthCheck, settings

# Deterministic by default so `make test` is a bounded, seeded run; `--hypothesis-profile=full` explores.
settings.register_profile("ci", derandomize=True, database=None, deadline=None, print_blob=True,
                          max_examples=60, suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("full", deadline=None, print_blob=True, max_examples=2000,
                          suppress_health_check=[HealthCheck.too_slow])
settings.register_profile("dev", deadline=None, max_examples=30, suppress_health_check=[HealthCheck.too_slow])
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))


def _ngspice_problem() -> str | None:
    """None when ngspice's shared library loads; otherwise why not."""
    try:
        from crosscheck.spice.engine import ngspice_available
    except ImportError as exc:  # the reference module is missing or broken: a real failure
        return f"crosscheck.spice.engine cannot be imported: {exc}"
    return ngspice_available()


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """Tests marked `spice` fail loudly when ngspice is missing: they must run in CI, never skip."""
    if not any(item.get_closest_marker("spice") for item in items):
        return
    problem = _ngspice_problem()
    if problem is None:
        return
    for item in items:
        if item.get_closest_marker("spice"):
            item.add_marker(pytest.mark.usefixtures("_ngspice_required"))
    config._crosscheck_ngspice_problem = problem  # type: ignore[attr-defined]


@pytest.fixture
def _ngspice_required(request: pytest.FixtureRequest) -> None:
    problem = getattr(request.config, "_crosscheck_ngspice_problem", None)
    if problem:
        pytest.fail(f"ngspice is needed by this test and is not usable: {problem}. "
                    "Install it with: sudo apt-get install -y libngspice0 libngspice0-dev", pytrace=False)

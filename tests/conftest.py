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


#: Set to 1 to let spice-marked tests skip (with the reason) on a machine without ngspice. Never set in CI.
SKIP_SPICE_ENV = "CROSSCHECK_SKIP_SPICE_TESTS"


def _ngspice_problem_once(config: pytest.Config) -> str | None:
    """``_ngspice_problem``, asked once per session."""
    if not hasattr(config, "_crosscheck_ngspice_problem"):
        config._crosscheck_ngspice_problem = _ngspice_problem()  # type: ignore[attr-defined]
    return config._crosscheck_ngspice_problem  # type: ignore[attr-defined]


def pytest_runtest_setup(item: pytest.Item) -> None:
    """A test marked `spice` fails loudly when ngspice cannot load: it must run in CI, never skip.

    Runs at each test's set-up (a fixture added at collection time would come too late to be used).
    Only an explicit opt-out (SKIP_SPICE_ENV=1) turns the failure into a skip that names the reason.
    """
    if item.get_closest_marker("spice") is None:
        return
    problem = _ngspice_problem_once(item.config)
    if problem is None:
        return
    if os.environ.get(SKIP_SPICE_ENV) == "1":
        pytest.skip(f"ngspice tests skipped on purpose ({SKIP_SPICE_ENV}=1): {problem}")
    pytest.fail(f"ngspice is needed by this test and is not usable: {problem}. Install it with: "
                f"sudo apt-get install -y libngspice0 libngspice0-dev (or set {SKIP_SPICE_ENV}=1 to skip "
                "these tests on purpose, never in CI)", pytrace=False)

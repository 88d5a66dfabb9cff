"""The own route's budget: validated limits, a memory estimate checked before assembly, a deadline between runs."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.sparse.linalg as spla

from crosscheck.errors import CrosscheckError
from crosscheck.fuzz.large import FAMILIES, build
from crosscheck.model import budget as budget_module
from crosscheck.model.budget import (
    DEFAULT_MEMORY_BYTES,
    DEFAULT_TIME_S,
    ENTRIES_PER_ELEMENT,
    LU_FILL,
    Budget,
    BudgetSettingError,
    MemoryBudgetError,
    TimeBudgetError,
    parse_memory,
)
from crosscheck.own.equivalent import thevenin
from crosscheck.own.solver import MnaSystem
from crosscheck.spice import workers

SWEEP = tuple(100.0 * 10 ** (i / 3) for i in range(13))  # 100 Hz to 1 MHz, 3 per decade


@pytest.mark.parametrize("bad", [math.inf, -math.inf, math.nan, 0.0, -1.0, True, "60"])
def test_an_unusable_timeout_is_a_usage_error_naming_the_flag(bad):
    """--timeout inf, nan, 0, a negative number or a non-number is refused with text that names --timeout."""
    with pytest.raises(BudgetSettingError, match=r"--timeout .* finite number of seconds above 0"):
        Budget(time_s=bad)


@pytest.mark.parametrize("bad", [0, -5, 1000, 2.5, True])
def test_an_unusable_memory_limit_is_refused(bad):
    """A memory limit under 1 MiB or not a whole number of bytes is refused, naming --memory."""
    with pytest.raises(BudgetSettingError, match="--memory"):
        Budget(memory_bytes=bad)


def test_setting_errors_are_crosscheck_value_errors():
    """A bad limit is both a CrosscheckError and a ValueError, so the command line can report it as usage."""
    assert issubclass(BudgetSettingError, CrosscheckError) and issubclass(BudgetSettingError, ValueError)


def test_none_means_no_limit_and_defaults_match_the_workers():
    """None is no limit of that kind; the defaults are 60 s and 2 GiB, and the ngspice pool uses the same."""
    assert Budget(None, None).deadline().at is None
    assert (Budget().time_s, Budget().memory_bytes) == (60.0, 2 << 30)
    assert (workers.DEFAULT_TIMEOUT_S, workers.DEFAULT_MEMORY_BYTES) == (DEFAULT_TIME_S, DEFAULT_MEMORY_BYTES)


@pytest.mark.parametrize(
    ("text", "want"),
    [("4G", 4 << 30), ("512M", 512 << 20), ("4GiB", 4 << 30), ("3gb", 3 << 30), ("1.5G", 3 << 29), ("2097152", 2 << 20)],
)
def test_memory_text_is_read_with_binary_suffixes(text, want):
    """--memory accepts bytes with K, M, G or T (binary), exactly."""
    assert parse_memory(text) == want


@pytest.mark.parametrize("text", ["", "4X", "G", "-1G", "inf", "1e9"])
def test_memory_text_that_is_not_an_amount_is_refused(text):
    """Text that is not a number with an optional suffix is refused with an example of the form."""
    with pytest.raises(BudgetSettingError, match="--memory 4G"):
        parse_memory(text)


def test_a_sweep_over_the_memory_limit_is_refused_before_assembly(monkeypatch):
    """A long sweep of a 1,000-node ladder under a 16 MiB limit is refused, naming estimate, limit and flag,
    without building the MNA system; with the limit raised it runs."""
    network, port = build("ladder", 1000)
    freqs = np.logspace(2, 6, 2000)
    built = []
    monkeypatch.setattr(MnaSystem, "__init__", lambda self, *a, **k: built.append(1) or None)
    with pytest.raises(MemoryBudgetError, match=r"about [\d.]+ MiB .* limit of 16 MiB; raise the limit with --memory"):
        thevenin(network, port, freqs, budget=Budget(memory_bytes=16 << 20))
    assert not built
    monkeypatch.undo()
    assert len(thevenin(network, port, freqs, budget=Budget(memory_bytes=1 << 30))) == 2000


@pytest.mark.parametrize(("nodes", "count"), [(20, 3000), (1000, 200), (5000, 40)])
def test_a_sweep_past_its_deadline_stops_with_the_flag_named(nodes, count):
    """A sweep (dense batches at 20 nodes, one sparse chain at 1,000, threaded runs at 5,000) past its deadline
    raises TimeBudgetError naming the first frequency not finished and --timeout."""
    network, port = build("ladder", nodes)
    with pytest.raises(TimeBudgetError, match=r"within 1e-09 s .*\(stopped at frequency 1 of \d+.*--timeout"):
        thevenin(network, port, np.logspace(2, 6, count), budget=Budget(time_s=1e-9))


@pytest.mark.parametrize(("nodes", "count"), [(20, 3000), (20, 3), (1000, 200)])
def test_a_budget_changes_no_answer(nodes, count):
    """Under a generous budget every equivalent is bit-identical to the unbudgeted sweep (tolerance: none)."""
    network, port = build("ladder", nodes)
    freqs = np.logspace(2, 6, count)
    assert thevenin(network, port, freqs, budget=Budget(3600.0, 8 << 30)) == thevenin(network, port, freqs)


def test_dense_batches_give_the_answers_of_one_batch():
    """A dense sweep cut into batches gives bit-identical solutions to each frequency solved alone (no tolerance)."""
    network, port = build("ladder", 20)
    system = MnaSystem(network)
    rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
    freqs = np.logspace(2, 6, 3000)
    xs, conds = system.solve_many(freqs, rhs)
    for i in (0, 1500, 2999):
        x, c = system.solve_many(freqs[i : i + 1], rhs)
        assert np.array_equal(x[0], xs[i]) and c[0] == conds[i]


@pytest.mark.parametrize("family", FAMILIES)
def test_the_estimate_allows_more_fill_than_a_sparse_lu_makes(family):
    """The estimate's LU allowance (LU_FILL per bounded matrix entry) covers SuperLU's real fill at 1,000 nodes."""
    network, port = build(family, 1000)
    system = MnaSystem(network)
    lu = spla.splu(system.matrix(1e3).tocsc())
    allowance = LU_FILL * ENTRIES_PER_ELEMENT * len(network.elements)
    assert lu.L.nnz + lu.U.nnz <= allowance / 2, (family, lu.L.nnz + lu.U.nnz, allowance)


def test_the_estimate_grows_with_each_dimension():
    """More unknowns, entries, frequencies or right-hand sides never lower the estimate."""
    base = budget_module.sweep_bytes(1000, 5000, 100, 2, dense=False)
    for args in ((2000, 5000, 100, 2), (1000, 9000, 100, 2), (1000, 5000, 300, 2), (1000, 5000, 100, 3)):
        assert budget_module.sweep_bytes(*args, dense=False) > base

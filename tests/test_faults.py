"""Fault injection: faults enter only as broken stamps handed to the own route (no switch anywhere), each
fault really breaks the own solver, and a bounded, seeded fuzz run catches every one."""

from __future__ import annotations

import pytest
from rich.console import Console

from crosscheck.fuzz.faults import FAULTS, faulty_route, faulty_stamps
from crosscheck.fuzz.loop import FuzzOptions, run_fuzz
from crosscheck.fuzz.reproducer import summary_document
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Port
from crosscheck.own.equivalent import thevenin
from crosscheck.report.fuzz_summary import print_summary

#: A small network per fault on which it must show (each needs its element: G, K, L or C, two nodes).
SHOWCASES = {
    "vccs-sign": ("r1 a 0 1k\ng1 a 0 b 0 2m\nr2 b a 1k\nv1 b 0 AC 1\n", Port("a", "0"), 1e3),
    "mutual-sign": ("v1 p 0 AC 1\nl1 p 0 10m\nl2 s 0 10m\nk1 l1 l2 0.5\nr1 s 0 100\nr2 p x 10\nr3 x s 50\n",
                    Port("s", "0"), 1e3),
    "f-for-omega": ("v1 in 0 AC 1\nr1 in out 1k\nc1 out 0 100n\n", Port("out", "0"), 1e3),
    "capacitor-inverted": ("v1 in 0 AC 1\nr1 in out 1k\nc1 out 0 100n\n", Port("out", "0"), 1e3),
    "injection-node": ("r1 a 0 1k\nr2 a b 2k\nr3 b 0 3k\n", Port("a", "0"), 0.0),
}
#: The most cases a fuzz run may need to catch a fault (it takes 1 to 6 with seed 1 today).
BOUND = 300


def test_a_run_without_faults_uses_the_real_route():
    """Faults are named per run: a run names none by default and its own route is ``thevenin`` itself; a run
    that names one gets stamps with exactly that fault, handed to ``thevenin``."""
    assert FuzzOptions().faults == () and FuzzOptions().own_route() is thevenin
    route = FuzzOptions(faults=("vccs-sign", "mutual-sign")).own_route()
    assert route.func is thevenin and route.keywords["stamps"].names == {"vccs-sign", "mutual-sign"}


def test_unknown_fault_is_refused():
    """A misspelt fault name is an error that lists the real ones."""
    with pytest.raises(ValueError, match="vccs-sign"):
        FuzzOptions(faults=("vccs-sing",))
    with pytest.raises(ValueError, match="vccs-sign"):
        faulty_stamps("vccs-sing")
    with pytest.raises(ValueError, match="at least one"):
        faulty_route()


@pytest.mark.parametrize("name", sorted(FAULTS))
def test_each_fault_breaks_the_own_solver(name):
    """On its showcase network each fault moves V_th or Z_th by more than 1e-3 relative; without it the
    answers are the same to 1e-12 before and after (the broken stamps leave nothing behind)."""
    text, port, f = SHOWCASES[name]
    network = read_netlist(text)
    [before] = thevenin(network, port, [f])
    [broken] = faulty_route(name)(network, port, [f])
    [after] = thevenin(network, port, [f])
    moved = max(abs(getattr(broken, q) - getattr(before, q)) / max(abs(getattr(before, q)), 1e-300)
                for q in ("vth", "zth") if getattr(before, q) is not None and getattr(broken, q) is not None)
    assert moved > 1e-3, name
    for q in ("vth", "zth"):
        assert abs(getattr(after, q) - getattr(before, q)) <= 1e-12 * abs(getattr(before, q))


@pytest.mark.spice
@pytest.mark.parametrize("name", sorted(FAULTS))
def test_fuzz_catches_each_fault(name, record_property):
    """A seeded fuzz run (seed 1) meets each fault within BOUND cases and says a fault was on."""
    summary = run_fuzz(FuzzOptions(count=BOUND, seed=1, workers=2, stop_after_failures=1, shrink=False,
                                   faults=(name,)))
    assert summary.first_problem_at is not None and summary.first_problem_at <= BOUND, name
    assert summary.problems[0].status in ("fail", "unavailable", "error")
    assert summary.faults == (name,)
    record_property("cases_to_catch", summary.first_problem_at)
    print(f"{name}: caught after {summary.first_problem_at} case(s)")
    doc = summary_document(summary)
    assert [f["name"] for f in doc["faults_injected"]] == [name]
    console = Console(record=True, width=120)
    print_summary(console, summary)
    assert f"FAULT INJECTED: {name}" in console.export_text()


@pytest.mark.spice
def test_summary_without_fault_says_none():
    """A healthy run's summary names no fault."""
    summary = run_fuzz(FuzzOptions(count=5, seed=3, workers=1, shrink=False))
    console = Console(record=True, width=120)
    print_summary(console, summary)
    assert summary.faults == () and "FAULT INJECTED" not in console.export_text()
    assert summary_document(summary)["faults_injected"] == []

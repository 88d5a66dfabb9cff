"""How closely the own route's adjoint sensitivities agree with ngspice's central differences.

Runs the spread of every corpus case that states one, the failing spread case under tests/data, and seeded
generated networks (every R, L and C varied by 1 %) through ``run.spread.with_spread``, and prints, over every
sensitivity ngspice checked: how many parts and networks, the worst relative difference
|own - ngspice| / max(|ngspice|, 1e-6) for |q| and for phase, the worst difference as a fraction of the
measured tolerance (``spice.spread.difference_tolerance``), and how many checks failed.

    python benchmarks/spread_agreement.py [--generated N]

No timing is asserted anywhere; the numbers are what one run on this machine gave.
"""

from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path

from crosscheck.fuzz.generate import generate_case
from crosscheck.judge.case import judged
from crosscheck.judge.result import CaseResult
from crosscheck.judge.spread import SpreadCheck
from crosscheck.model.cases import load_case
from crosscheck.model.tolerance import SOLVER_VS_SPICE
from crosscheck.model.vary import SpreadSpec, parse_vary_option
from crosscheck.own.equivalent import thevenin
from crosscheck.run.check import run_cases
from crosscheck.run.spread import with_spread
from crosscheck.spice.workers import SpicePool

ROOT = Path(__file__).resolve().parent.parent
FLOOR = 1e-6  # % per % (or ° per %): below this a sensitivity is zero for the relative figure


def _case_results(pool: SpicePool) -> list[CaseResult]:
    paths = [p for p in sorted((ROOT / "corpus").rglob("*.toml")) if load_case(p).spread is not None]
    paths.append(ROOT / "tests" / "data" / "failing_spread" / "hydrophone_adc_filter.toml")
    return run_cases([load_case(p) for p in paths], engine="both", pool=pool)


def _generated(pool: SpicePool, count: int) -> list[CaseResult]:
    """Seeded generated networks with every R, L and C at 1 % (networks without one are skipped)."""
    out = []
    for seed in range(count):
        g = generate_case(seed)
        kinds = sorted({e.kind for e in g.network.elements if e.kind in "RLC"})
        if not kinds or g.caveat:
            continue
        spec = SpreadSpec(tuple(parse_vary_option(f"{k}*=1%") for k in kinds), samples=0, spice_samples=0)
        head = CaseResult(f"generated {seed}", g.family, (g.port.a, g.port.b), g.freqs_hz, SOLVER_VS_SPICE)
        try:
            own = tuple(thevenin(g.network, g.port, g.freqs_hz))
        except (ArithmeticError, ValueError):
            continue
        result = judged(CaseResult(**{**head.__dict__, "own": own}), g.network, compare=False)
        out.append(with_spread(result, g.network, pool, "both", spec))
    return out


def _real(x: complex | float | None) -> float:
    return math.nan if x is None else float(x.real)


def _relative(c: SpreadCheck) -> float:
    return abs(_real(c.own) - _real(c.spice)) / max(abs(_real(c.spice)), FLOOR)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--generated", type=int, default=20, help="generated networks to add (default 20)")
    args = parser.parse_args(argv)
    with SpicePool(workers=2) as pool:
        results = _case_results(pool) + _generated(pool, args.generated)
    spreads = [(r.name, r.spread) for r in results if r.spread is not None]
    checks = [c for _, s in spreads for c in s.checks if c.kind == "sensitivity" and c.spice is not None]
    networks = {name for name, s in spreads if any(c.kind == "sensitivity" for c in s.checks)}
    parts = {(name, c.subject) for name, s in spreads for c in s.checks if c.kind == "sensitivity"}
    if not checks:
        print("no sensitivity was checked", file=sys.stderr)
        return 1
    for function in ("abs", "phase_deg"):
        group = [c for c in checks if c.function == function]
        worst = max(group, key=_relative)
        share = max(c.difference / c.allowed for c in group if c.allowed > 0)
        large = [c for c in group if abs(_real(c.spice)) >= 1e-3]
        sizable = max(map(_relative, large)) if large else math.nan
        print(
            f"{function:9s}: {len(group)} checks; worst relative difference {_relative(worst):.2e} "
            f"({worst.quantity} to {worst.subject} at {worst.freq_hz:g} Hz: own {_real(worst.own):.6g}, "
            f"ngspice {_real(worst.spice):.6g}); worst difference / tolerance {share:.2e}; over the "
            f"{len(large)} with |ngspice| >= 1e-3, worst relative difference {sizable:.2e}"
        )
    failed = sum(1 for c in checks if c.verdict != "pass")
    print(f"{len(parts)} parts in {len(networks)} networks; {failed} of {len(checks)} checks failed")
    return 0 if failed == 0 else 1


if __name__ == "__main__":
    sys.exit(main())

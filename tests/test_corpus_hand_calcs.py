"""The bundled corpus: every expected value agrees with crosscheck's solver and with the script it came from.

Each case file under ``corpus/`` records expected values (``[[expect]]``) and design
limits. The expected values are closed-form formulas (dividers, series/parallel
combinations, source transformations, transformer reflection) evaluated in double
precision by ``corpus/hand_values.py``, a plain-Python script independent of
crosscheck; each ``how`` names the function and the digits it states. Two checks
hold them: the stated value is the script's value rounded as the ``how`` says (so a
value edited by hand fails), and it agrees with crosscheck's solver to the
expectation's own tolerance, which matches that rounding. The limits are evaluated
here with a small evaluator of our own, so a corpus edit that breaks a design
requirement fails, and the on-purpose failing case in ``tests/data/failing_limit/``
must keep failing its limit.
"""

from __future__ import annotations

import importlib.util
import math
import re
import tomllib
from pathlib import Path

import numpy as np
import pytest

from crosscheck.model.cases import Case, load_case
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import GROUND, Network, Port, floating_reference
from crosscheck.model.port_matrices import MatrixPoint
from crosscheck.model.values import parse_number
from crosscheck.own.equivalent import Equivalent, thevenin
from crosscheck.own.multiport import reduce_ports

ROOT = Path(__file__).resolve().parent.parent
CORPUS = ROOT / "corpus"
FAILING = Path(__file__).resolve().parent / "data" / "failing_limit" / "workshop_subboard.toml"
FIELDS = ("audio", "instrumentation", "rf", "power_distribution", "power_electronics", "control")
CASE_FILES = sorted(CORPUS.rglob("*.toml"))


def _case_id(path: Path) -> str:
    return path.relative_to(CORPUS).with_suffix("").as_posix()


def _network(case: Case) -> tuple[Network, Port]:
    port = Port(*case.port)
    return read_netlist(case.netlist_text, file=case.netlist_file, port=port,
                        allow_negative=case.allow_negative), port


def _expectations_of(case: Case) -> tuple:
    """The case's [[expect]]: one-port ``Expectation``s, or a multi-port case's ``Expectation``s (matrix keys)."""
    return case.multiport.expectations if case.multiport is not None else case.expectations


def _limits_of(case: Case) -> tuple:
    return case.multiport.limits if case.multiport is not None else case.limits


def _points(case: Case, freqs: list[float]) -> dict[float, MatrixPoint]:
    network, _ = _network(case)
    assert case.multiport is not None
    return dict(zip(freqs, reduce_ports(network, case.multiport.ports, freqs)))


_A = complex(-0.5, math.sqrt(3) / 2)  # e^(j 120 deg)
#: Fortescue's matrix: phase quantities = FORTESCUE @ sequence quantities (common practice).
FORTESCUE = np.array([[1, 1, 1], [1, _A * _A, _A], [1, _A, _A * _A]])


def _matrix_quantity(point: MatrixPoint, key: str) -> complex | None:
    """``key`` of a multi-port point, written here apart from the judge: z<i><j>, y<i><j>, voc<k>, isc<k>, the pair's
    zdiff = z11 - z12 - z21 + z22 and zcomm = (z11 + z12 + z21 + z22)/4, and z0 z1 z2 from A^-1 Z A."""
    if key in ("zdiff", "zcomm") and point.z is not None:
        z = point.z
        return complex(z[0, 0] - z[0, 1] - z[1, 0] + z[1, 1] if key == "zdiff" else z.sum() / 4)
    if key in ("z0", "z1", "z2") and point.z is not None:
        k = int(key[1])
        return complex(np.linalg.solve(FORTESCUE, point.z @ FORTESCUE)[k, k])
    m = re.fullmatch(r"(z|y)(\d)(\d)|(voc|isc)(\d)", key)
    assert m is not None, f"no such quantity {key!r}"
    if m.group(1):
        matrix = point.z if m.group(1) == "z" else point.y
        return None if matrix is None else complex(matrix[int(m.group(2)) - 1, int(m.group(3)) - 1])
    vector = point.voc if m.group(4) == "voc" else point.isc
    return None if vector is None else complex(vector[int(m.group(5)) - 1])


def _phase_diff_deg(a: complex, b: complex) -> float:
    """Wrapped difference of the two angles, in (-180, 180]."""
    d = math.degrees(np.angle(a) - np.angle(b))
    return (d + 180.0) % 360.0 - 180.0


def _obtained(eq: Equivalent, key: str) -> complex | float | None:
    if key in ("vth", "zth", "yn"):
        return getattr(eq, key)
    if key == "in":
        return eq.in_
    form = eq.series_form()
    if form is None:
        return None
    if key == "series_r":
        return form.resistance
    kind = {"series_l": "L", "series_c": "C"}[key]
    return form.reactive_value if form.reactive_kind == kind else None


def _mismatch(key: str, expected: complex, obtained: complex | float | None, rel: float, abs_: float,
              phase_deg: float | None) -> str | None:
    """Why ``obtained`` is not ``expected`` within the tolerance, or None when it is."""
    if obtained is None:
        return f"{key}: the solver gives no such form here (expected {expected:.4g})"
    if key.startswith("series_"):
        err = abs(obtained - expected.real)
        if err > max(rel * abs(obtained), abs_):
            return (f"{key}: expected {expected.real:.6g}, solver {obtained:.6g}, relative error "
                    f"{err / abs(obtained):.2e} > rel {rel:g}")
        return None
    obtained = complex(obtained)
    mag_err = abs(abs(obtained) - abs(expected))
    if mag_err > max(rel * abs(obtained), abs_):
        return (f"{key}: expected |{key}| = {abs(expected):.6g}, solver {abs(obtained):.6g}, magnitude error "
                f"{mag_err / max(abs(obtained), 1e-300):.2e} > rel {rel:g}")
    if phase_deg is not None and abs(expected) > abs_ and abs(obtained) > abs_:
        dph = _phase_diff_deg(expected, obtained)
        if abs(dph) > phase_deg:
            return (f"{key}: expected angle {math.degrees(np.angle(expected)):.3f} deg, solver "
                    f"{math.degrees(np.angle(obtained)):.3f} deg, off by {dph:+.3f} > {phase_deg:g} deg")
    return None


@pytest.mark.parametrize("path", CASE_FILES, ids=_case_id)
def test_hand_calculations_agree_with_the_solver(path: Path) -> None:
    """Every [[expect]] value of the case agrees with crosscheck's own solver to the tolerance the case states."""
    case = load_case(path)
    assert _expectations_of(case), f"{path}: no [[expect]]"
    network, port = _network(case)
    freqs = sorted({e.at_hz for e in _expectations_of(case)})
    if case.multiport is not None:
        points = _points(case, freqs)
        obtained = {f: (lambda key, f=f: _matrix_quantity(points[f], key)) for f in freqs}
    else:
        equivalents = dict(zip(freqs, thevenin(network, port, freqs)))
        obtained = {f: (lambda key, f=f: _obtained(equivalents[f], key)) for f in freqs}
    problems = []
    for e in _expectations_of(case):
        tol = e.tolerance
        for key, expected in e.values.items():
            why = _mismatch(key, expected, obtained[e.at_hz](key), tol.rel, tol.abs, tol.phase_deg)
            if why:
                problems.append(f"expect[{e.index}] at {e.at_hz:g} Hz: {why}")
    assert not problems, f"{path}:\n  " + "\n  ".join(problems)


# ---------------------------------------------------------------- where each expected value comes from

HAND_VALUES = CORPUS / "hand_values.py"
_FUNCTION = re.compile(r"corpus/hand_values\.py \(function (\w+)\)")
_DIGITS = re.compile(r"Printed to (\d+) significant figures \(angles to 0\.(0*)1 degree\)")
#: The tolerance that matches each stated precision: 5 figures -> 1e-4 and 0.01 degree (the rounding is at most
#: 5e-5 relative per part and 0.0005 degree); 3 figures -> the 1 % and 0.5 degree of a hand check.
_TOLERANCE_FOR = {5: (1e-4, 0.01), 3: (1e-2, 0.5)}


def _hand_values():
    """corpus/hand_values.py, imported by path (it is a script, not a package module)."""
    spec = importlib.util.spec_from_file_location("corpus_hand_values", HAND_VALUES)
    assert spec is not None and spec.loader is not None, f"cannot import {HAND_VALUES}"
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def _rounded(x: float, sig: int) -> float:
    return float(f"{x:.{sig - 1}e}")


def _same(a: float, b: float) -> bool:
    """Equal up to the binary representation of decimal text (1e-12 relative)."""
    return abs(a - b) <= 1e-12 * max(abs(a), abs(b), 1e-300)


def _rounding_problems(key: str, stated: str, value: complex | float, sig: int, decimals: int) -> list[str]:
    """How ``stated`` differs from ``value`` rounded to ``sig`` figures (angles to ``decimals``), part by part."""
    value = complex(value)
    text = stated.strip()
    if "∠" in text:
        mag_text, ang_text = text.split("∠")
        angle = math.degrees(math.atan2(value.imag, value.real))
        pairs = [("magnitude", parse_number(mag_text), _rounded(abs(value), sig)),
                 ("angle", float(ang_text.rstrip("°")), round(angle, decimals) + 0.0)]
    elif (m := re.fullmatch(r"(\S+)\s*([+-])\s*j(\S+)", text)) is not None:
        im = parse_number(m.group(3)) * (-1 if m.group(2) == "-" else 1)
        pairs = [("real part", parse_number(m.group(1)), _rounded(value.real, sig)),
                 ("imaginary part", im, _rounded(value.imag, sig))]
    else:
        pairs = [("value", parse_number(text), _rounded(value.real, sig))]
        half_unit = 0.5 * 10.0 ** (math.floor(math.log10(abs(value.real))) - sig + 1) if value.real else 0.0
        if abs(value.imag) > half_unit:
            pairs.append(("imaginary part (stated as 0)", 0.0, value.imag))
    return [f"{key}: stated {what} {s!r} from {stated!r}, the script gives {v!r} rounded as the how says"
            for what, s, v in pairs if not _same(s, v)]


@pytest.fixture(scope="module")
def hand_values():
    return _hand_values()


@pytest.mark.parametrize("path", CASE_FILES, ids=_case_id)
def test_stated_values_are_the_scripts_values_rounded_as_stated(path: Path, hand_values) -> None:
    """Every [[expect]] names a corpus/hand_values.py function and its digits; each stated value is that
    function's value at the expectation's frequency rounded to those digits (exact up to 1e-12 relative), and
    the tolerance is the one that matches the digits."""
    case = load_case(path)
    raw = tomllib.loads(path.read_text(encoding="utf-8"))["expect"]
    problems = []
    for e, table in zip(_expectations_of(case), raw, strict=True):
        where = f"expect[{e.index}] at {e.at_hz:g} Hz"
        function, digits = _FUNCTION.search(e.how), _DIGITS.search(e.how)
        if function is None or digits is None:
            problems.append(f"{where}: the how must say 'corpus/hand_values.py (function NAME)' and "
                            f"'Printed to N significant figures (angles to 0.0..1 degree)'")
            continue
        sig, decimals = int(digits.group(1)), len(digits.group(2)) + 1
        if (e.tolerance.rel, e.tolerance.phase_deg or _TOLERANCE_FOR.get(sig, (0, 0))[1]) != _TOLERANCE_FOR.get(sig):
            problems.append(f"{where}: {sig} figures need rel, phase_deg = {_TOLERANCE_FOR.get(sig)}, "
                            f"the case has {e.tolerance.rel}, {e.tolerance.phase_deg}")
        values = getattr(hand_values, function.group(1))(e.at_hz)
        for key in e.values:
            if key not in values:
                problems.append(f"{where}: {function.group(1)} gives no {key}")
                continue
            problems += [f"{where}: {p}" for p in _rounding_problems(key, str(table[key]), values[key], sig, decimals)]
    assert not problems, f"{path}:\n  " + "\n  ".join(problems)


def test_the_script_covers_every_expectation_and_nothing_else(hand_values) -> None:
    """The script's table of points is exactly the corpus's [[expect]] list (case, function named in the how,
    frequency), in file order: no stated value without a source, no script value without a case."""
    in_corpus = []
    for path in CASE_FILES:
        for e in _expectations_of(load_case(path)):
            found = _FUNCTION.search(e.how)
            in_corpus.append((_case_id(path), found.group(1) if found else None, e.at_hz))
    in_script = [(case, function.__name__, f_hz) for case, function, f_hz in hand_values.POINTS]
    assert in_script == in_corpus


def test_the_script_stands_alone() -> None:
    """corpus/hand_values.py imports only the standard library's math and cmath (no crosscheck, no numpy)."""
    imports = re.findall(r"^\s*(?:from\s+(\S+)\s+import|import\s+(\S+))", HAND_VALUES.read_text(encoding="utf-8"),
                         flags=re.M)
    assert {a or b for a, b in imports} <= {"__future__", "math", "cmath"}


# ---------------------------------------------------------------- design limits, evaluated independently


def _limit_value(function: str, q: complex) -> float:
    return {"abs": abs(q), "phase": math.degrees(np.angle(q)), "re": q.real, "im": q.imag,
            "db": 20.0 * math.log10(abs(q)) if q != 0 else -math.inf}[function]


def _limit_violations(case: Case) -> list[str]:
    """Each (limit, frequency) at which a limit of the case is not met, by our own reading of the limit."""
    network, port = _network(case)
    if case.multiport is not None:
        eqs = list(_points(case, list(case.freqs_hz)).values())
        value_of = _matrix_quantity
    else:
        eqs = thevenin(network, port, list(case.freqs_hz))
        value_of = _obtained
    out = []
    for lim in _limits_of(case):
        lo, hi = lim.band if lim.band is not None else (-math.inf, math.inf)
        in_band = [eq for eq in eqs if lo * (1 - 1e-12) <= eq.freq_hz <= hi * (1 + 1e-12)]
        assert in_band, f"{case.path}: limit[{lim.index}] {lim.text} has no computed frequency in its band"
        for eq in in_band:
            q = value_of(eq, lim.quantity)
            assert q is not None, f"{case.path}: limit[{lim.index}] {lim.text}: no {lim.quantity} at {eq.freq_hz:g} Hz"
            v = _limit_value(lim.function, complex(q))
            if (lim.minimum is not None and v < lim.minimum) or (lim.maximum is not None and v > lim.maximum):
                out.append(f"limit[{lim.index}] {lim.text} = {v:.6g} at {eq.freq_hz:g} Hz, "
                           f"outside [{lim.minimum}, {lim.maximum}]")
    return out


@pytest.mark.parametrize("path", CASE_FILES, ids=_case_id)
def test_design_limits_are_met(path: Path) -> None:
    """Every [[limit]] of a corpus case holds at every computed frequency in its band (exact bounds, no tolerance)."""
    violations = _limit_violations(load_case(path))
    assert not violations, f"{path}:\n  " + "\n  ".join(violations)


def test_failing_case_still_violates_its_limit_and_only_its_limit() -> None:
    """The on-purpose failing case keeps a correct hand calculation and a source impedance above its allowed maximum."""
    case = load_case(FAILING)
    network, port = _network(case)
    (eq,) = thevenin(network, port, [50.0])
    for e in case.expectations:
        for key, expected in e.values.items():
            tol = e.tolerance
            assert _mismatch(key, expected, _obtained(eq, key), tol.rel, tol.abs, tol.phase_deg) is None
    violations = _limit_violations(case)
    assert len(violations) == 1 and "abs(zth)" in violations[0], violations
    # It fails by a clear margin (40 %), not by roundoff: |Z_th| = 0.1401 ohm against 0.1 ohm.
    assert abs(eq.zth) > 1.3 * case.limits[0].maximum


# ---------------------------------------------------------------- what the corpus must contain


def _cards(text: str) -> list[str]:
    """The netlist's cards, lower-cased, comments removed, title line dropped (continuations are not needed here)."""
    out = []
    for line in text.splitlines()[1:]:
        line = re.split(r"[;$]", line, maxsplit=1)[0].strip().lower()
        if line and not line.startswith(("*", "+")):
            out.append(line)
    return out


def _has_nested_instance(cards: list[str]) -> bool:
    inside = False
    for card in cards:
        if card.startswith(".subckt"):
            inside = True
        elif card.startswith(".ends"):
            inside = False
        elif inside and card.startswith("x"):
            return True
    return False


@pytest.fixture(scope="module")
def corpus() -> list[tuple[Path, Case, dict, Network, Port]]:
    rows = []
    for path in CASE_FILES:
        case = load_case(path)
        network, port = _network(case)
        rows.append((path, case, tomllib.loads(path.read_text(encoding="utf-8")), network, port))
    return rows


def test_corpus_size_and_fields(corpus) -> None:
    """At least 20 cases, grouped by field, at least 3 in each field folder and nothing outside them."""
    assert len(corpus) >= 20, f"only {len(corpus)} case files under {CORPUS}"
    counts = {field: 0 for field in FIELDS}
    for path, *_ in corpus:
        field = path.relative_to(CORPUS).parts[0]
        assert field in counts, f"{path}: not in one of the field folders {FIELDS}"
        counts[field] += 1
    thin = {f: n for f, n in counts.items() if n < 3}
    assert not thin, f"field folders with fewer than 3 cases: {thin}"


def test_every_case_has_a_documented_expectation_and_a_limit(corpus) -> None:
    """Each case has a title, a leading comment block, >= 1 [[expect]] with a non-empty how, >= 1 [[limit]] with a why."""
    for path, case, raw, _, _ in corpus:
        assert case.title and case.title != path.stem, f"{path}: no title"
        assert path.read_text(encoding="utf-8").startswith("#"), f"{path}: should open with a comment block"
        assert _expectations_of(case), f"{path}: no [[expect]]"
        assert all(e.how.strip() for e in _expectations_of(case)), f"{path}: an [[expect]] without how"
        assert _limits_of(case), f"{path}: no [[limit]]"
        assert all(str(item.get("why", "")).strip() for item in raw["limit"]), f"{path}: a [[limit]] without why"


def test_corpus_covers_the_features_it_claims(corpus) -> None:
    """Dependent sources, coupled inductors, (nested) subcircuits, .param, floating ports, sweeps, DC and RMS all occur."""
    kinds: dict[str, list[str]] = {}
    found: dict[str, list[str]] = {k: [] for k in (
        "subckt", "nested subckt", "param", "inline netlist", "floating port", "floating transformer secondary",
        "sweep", "sweep with a limit over a band", "DC point", "rms sources", "Norton expectation", "series form",
        "three-phase sequence-impedance limits", "differential-pair mode limits")}
    for path, case, raw, network, port in corpus:
        name = _case_id(path)
        for e in network.elements:
            kinds.setdefault(e.kind, []).append(name)
        cards = _cards(case.netlist_text)
        if any(c.startswith(".subckt") for c in cards):
            found["subckt"].append(name)
        if _has_nested_instance(cards):
            found["nested subckt"].append(name)
        if any(c.startswith(".param") for c in cards):
            found["param"].append(name)
        if "\n" in raw["netlist"]:
            found["inline netlist"].append(name)
        if port.a != GROUND and port.b != GROUND:
            found["floating port"].append(name)
            if floating_reference(network, port) is not None and any(e.kind == "K" for e in network.elements):
                found["floating transformer secondary"].append(name)
        if "sweep" in raw:
            found["sweep"].append(name)
            if any(lim.band is not None for lim in case.limits):
                found["sweep with a limit over a band"].append(name)
        if 0.0 in case.freqs_hz:
            found["DC point"].append(name)
        if case.sources == "rms":
            found["rms sources"].append(name)
        if any(k in e.values for e in case.expectations for k in ("in", "yn")):
            found["Norton expectation"].append(name)
        if any(k.startswith("series_") for e in case.expectations for k in e.values):
            found["series form"].append(name)
        limited = {lim.quantity for lim in _limits_of(case)}
        if case.multiport is not None and {"z0", "z1", "z2"} <= limited:
            found["three-phase sequence-impedance limits"].append(name)
        if case.multiport is not None and {"zdiff", "zcomm"} <= limited:
            found["differential-pair mode limits"].append(name)
    for kind in ("E", "G", "F", "H", "K"):
        assert kinds.get(kind), f"no case uses a {kind} element"
    assert len(set(kinds["K"])) >= 2, "coupled inductors should appear in a transformer and in a coupled-inductor filter"
    missing = [feature for feature, names in found.items() if not names]
    assert not missing, f"features no case exercises: {missing}"


def test_fault_level_case_follows_the_stated_method(corpus) -> None:
    """The power-distribution fault-level case states I''k as I_N, uses RMS sources and marks its formulas and cautions."""
    hits = []
    for path, case, raw, _, _ in corpus:
        if path.relative_to(CORPUS).parts[0] != "power_distribution":
            continue
        text = path.read_text(encoding="utf-8")
        if "I''k" in text and any("in" in e.values for e in case.expectations):
            hits.append(path)
            assert case.sources == "rms", f"{path}: fault levels are stated as RMS"
            for phrase in ("IEC 60909-0", "from memory", "licensed engineer", "not a protection study"):
                assert phrase in text, f"{path}: the comment block should say {phrase!r}"
            # The source is the phase voltage c*Un/sqrt(3): V_th (open circuit) equals it exactly.
            network, port = _network(case)
            (eq,) = thevenin(network, port, [50.0])
            printed = re.search(r"c\*Un/sqrt\(3\) = [^=]+= ([\d.]+) V rms", text)
            assert printed, f"{path}: the comment block should print c*Un/sqrt(3) = ... = <value> V rms"
            # The comment prints 4 figures, so 0.05 % covers its rounding.
            assert abs(eq.vth) == pytest.approx(float(printed.group(1)), rel=5e-4)
    assert hits, "no fault-level case (I''k as an [[expect]] of in) under corpus/power_distribution"


@pytest.mark.spice
def test_corpus_passes_solver_against_spice() -> None:
    """`crosscheck verify corpus`: every case's equivalents agree with ngspice within the case's own tolerance."""
    from crosscheck.run.check import run_cases
    from crosscheck.spice.workers import SpicePool

    with SpicePool(workers=2) as pool:
        results = run_cases([load_case(p) for p in CASE_FILES], engine="both", pool=pool)
    def compared(r) -> tuple:
        return r.multiport.checks if r.multiport is not None else r.points

    bad = [(r.name, r.verdict, r.error or r.explanation) for r in results
           if r.error or not compared(r) or any(p.verdict != "pass" for p in compared(r))]
    assert not bad, bad
    assert [r.verdict for r in results] == ["pass"] * len(results), [(r.name, r.verdict) for r in results]

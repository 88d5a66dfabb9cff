"""Component spread: which parts vary and by how much, and the frozen types a spread answer is made of.

A spread is stated as ``Vary`` entries, from a case file's ``[[vary]]`` tables or from ``--vary`` options;
``resolve`` turns them into ``VariedPart`` records against one network. Every tolerance is symmetric about
the nominal value: a part takes ``nominal + u * delta`` with ``u`` in [-1, 1] (``delta`` = tol x |nominal|
for a relative tolerance, the absolute tolerance otherwise). ``uniform`` draws ``u`` evenly, ``normal`` draws
it with sigma = 1/3 (the tolerance is 3 sigma; draws beyond the tolerance are kept, not clipped), ``corners``
draws -1 or +1. Parts in one ``group`` share one ``u`` (matched pairs, one reel).

The result types (``QuantitySpread``, ``Extreme``, ``MonteCarlo``, ``PointSpread``, ``LimitSpread``,
``OwnSpread``) are plain frozen data: ``own.spread`` fills them, the judge and the reports read them.
"""

from __future__ import annotations

import fnmatch
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from crosscheck.errors import CaseFileError, CrosscheckError, ValueSyntaxError
from crosscheck.model.network import Network
from crosscheck.model.values import parse_number

DISTRIBUTIONS = ("uniform", "normal", "corners")
#: Element kinds whose ``value`` may vary (R, L, C, gains of E/F/G/H, K's coupling) and the sources.
VALUE_KINDS = frozenset("RLCEFGHK")
SOURCE_KINDS = frozenset("VI")
#: Percentiles of |q| and phase a Monte Carlo run reports, in percent.
PERCENTILES = (0.1, 1.0, 50.0, 99.0, 99.9)
#: Most samples one run may ask for (each costs one refactorization per frequency).
MAX_SAMPLES = 1_000_000
#: Longest part name or pattern, and most patterns in one entry (untrusted input stays cheap to match).
MAX_NAME_CHARS = 200
MAX_PATTERNS = 1000
VARY_KEYS = frozenset({"parts", "tol", "dist", "group", "why"})
_OPTION_FORM = 'PATTERNS=TOL[:DIST][@GROUP], like "R*=1%", "C1=10n", "V1=10%:normal" or "R1,R2=1%@pair"'


class SpreadError(CrosscheckError, ValueError):
    """A spread statement that cannot be applied: a bad tolerance, a pattern that matches nothing."""


@dataclass(frozen=True)
class Vary:
    """One stated spread: parts (names or fnmatch globs), a relative or absolute tolerance, how it is drawn."""

    parts: tuple[str, ...]
    tol_rel: float | None
    tol_abs: float | None
    dist: str = "uniform"
    group: str | None = None
    why: str = ""


@dataclass(frozen=True)
class SpreadSpec:
    """All stated spreads of one run; ``samples`` = 0 skips Monte Carlo; ``spice_samples`` are re-run by ngspice."""

    varies: tuple[Vary, ...]
    samples: int = 0
    seed: int = 1
    spice_samples: int = 20


@dataclass(frozen=True)
class VariedPart:
    """One element parameter that varies: ``nominal + u * delta``, ``u`` in [-1, 1].

    ``name`` is the label users write and reports show (``r1``, ``xfilt.r1`` inside a subcircuit);
    ``element`` is the element's name in the network (``r.xfilt.r1``); ``parameter`` is the field that
    varies: ``value``, ``ac_mag`` (a source under AC excitation) or ``dc_value`` (under DC).
    """

    name: str
    element: str
    kind: str
    parameter: str
    nominal: float
    delta: float
    dist: str
    group: str | None

    @property
    def low(self) -> float:
        return self.nominal - self.delta

    @property
    def high(self) -> float:
        return self.nominal + self.delta

    def at(self, u: float) -> float:
        """The value at normalised deviation ``u`` (-1: low end, +1: high end)."""
        return self.nominal + u * self.delta


@dataclass(frozen=True)
class Extreme:
    """The smallest and largest value of one function of a quantity over the tolerance box.

    Corners map part names to values. Methods say who found each extreme: ``first-order corner`` (the
    corner the sensitivities point to, solved exactly), ``corner search`` (a local search over corners,
    flipping one part at a time, beat it), ``sample`` (a Monte Carlo sample beat both; the box's interior).
    ``first_order_min``/``max`` are the linear estimates before any solve.
    """

    minimum: float
    maximum: float
    min_corner: Mapping[str, float]
    max_corner: Mapping[str, float]
    min_method: str
    max_method: str
    first_order_min: float = float("nan")
    first_order_max: float = float("nan")


@dataclass(frozen=True)
class MonteCarlo:
    """Seeded samples of one quantity at one frequency: percentiles of |q| and phase (degrees), the worst sample.

    ``worst_index`` is the sample farthest from nominal in |q| (relative); ``subset`` is the quantity at the
    first ``spice_samples`` samples, the ones ngspice re-runs (their values: ``OwnSpread.sample_values``).
    """

    samples: int
    seed: int
    abs_percentiles: Mapping[float, float]
    phase_percentiles: Mapping[float, float]
    worst_index: int
    worst_value: complex
    worst_values: Mapping[str, float]
    subset: tuple[complex, ...] = ()


@dataclass(frozen=True)
class QuantitySpread:
    """One quantity (vth, zth or in) at one frequency over the spread.

    ``sensitivities``: part -> (% change of |q| per % change of the part, degrees of phase per %), ranked by
    the size of the first; NaN when the nominal quantity is exactly 0. ``worst_case``: "abs", "phase_deg",
    "re", "im" -> ``Extreme`` (phase unwrapped about the nominal phase).
    """

    nominal: complex
    sensitivities: Mapping[str, tuple[float, float]]
    worst_case: Mapping[str, Extreme]
    monte_carlo: MonteCarlo | None = None


@dataclass(frozen=True)
class PointSpread:
    """The spread of the equivalent at one frequency; None where the form does not exist at nominal."""

    freq_hz: float
    vth: QuantitySpread | None
    zth: QuantitySpread | None
    in_: QuantitySpread | None


@dataclass(frozen=True)
class LimitSpread:
    """A design limit over the spread: its function's extremes over every point in its band.

    ``holds`` is True when both extremes lie within [min, max]; ``failing_corner`` is the part values at the
    worst violation (None when it holds), at ``failing_hz``; ``violating_fraction`` is the share of Monte
    Carlo samples that break it at any frequency of the band (None without Monte Carlo). Phase is in degrees,
    unwrapped about the nominal phase (a spread across ±180° reads e.g. 181°, not -179°).
    """

    index: int
    text: str
    minimum: float | None
    maximum: float | None
    lowest: float
    highest: float
    lowest_hz: float
    highest_hz: float
    lowest_corner: Mapping[str, float]
    highest_corner: Mapping[str, float]
    lowest_method: str
    highest_method: str
    holds: bool
    failing_corner: Mapping[str, float] | None
    failing_hz: float | None
    violating_fraction: float | None = None
    worst_sample: int | None = None
    #: The part values of ``worst_sample`` (the sample with the least margin to the limit), None without samples.
    worst_sample_values: Mapping[str, float] | None = None


@dataclass(frozen=True)
class OwnSpread:
    """Everything the own route found: the parts, each point, each limit, and the sample values ngspice re-runs."""

    parts: tuple[VariedPart, ...]
    points: tuple[PointSpread, ...]
    limits: tuple[LimitSpread, ...] = ()
    sample_values: tuple[Mapping[str, float], ...] = field(default=())
    notes: tuple[str, ...] = ()


def parse_tolerance(text: str | float) -> tuple[float | None, float | None]:
    """``"1%"`` -> (0.01, None); ``"10n"`` or 1e-8 -> (None, 1e-8). A tolerance must be positive."""
    if isinstance(text, str) and text.strip().endswith("%"):
        number = text.strip()[:-1].strip()
        try:
            rel = parse_number(number) / 100.0
        except ValueSyntaxError:
            raise SpreadError(
                f"cannot read the tolerance {text[:40]!r}; write 1% or an absolute value like 10n"
            ) from None
        if not 0.0 < rel < 1.0:
            raise SpreadError(f"the tolerance {text[:40]!r} must be above 0% and below 100%")
        return rel, None
    try:
        absolute = parse_number(text)
    except ValueSyntaxError:
        raise SpreadError(
            f"cannot read the tolerance {str(text)[:40]!r}; write 1% or an absolute value like 10n"
        ) from None
    if not absolute > 0.0 or absolute == float("inf"):
        raise SpreadError(f"the tolerance {str(text)[:40]!r} must be a positive finite value")
    return None, absolute


def _patterns(text: str) -> tuple[str, ...]:
    parts = tuple(p.strip().lower() for p in text.split(",") if p.strip())
    if not parts:
        raise SpreadError(f"no part names before '=' in {text[:60]!r}; write {_OPTION_FORM}")
    if len(parts) > MAX_PATTERNS:
        raise SpreadError(f"{len(parts)} part patterns in one entry; at most {MAX_PATTERNS}: use a glob like R*")
    for p in parts:
        if len(p) > MAX_NAME_CHARS:
            raise SpreadError(f"the part pattern {p[:40]!r}... is {len(p)} characters; at most {MAX_NAME_CHARS}")
        if not re.fullmatch(r"[a-z0-9_.*?\[\]!#$%&+-]+", p):
            raise SpreadError(f"{p[:40]!r} is not a part name or glob pattern; write {_OPTION_FORM}")
    return parts


def _dist(text: str) -> str:
    d = text.strip().lower()
    if d not in DISTRIBUTIONS:
        raise SpreadError(f"unknown distribution {text[:40]!r}; write one of {', '.join(DISTRIBUTIONS)}")
    return d


def parse_vary_option(text: str) -> Vary:
    """One ``--vary`` option: ``PATTERNS=TOL[:DIST][@GROUP]``.

    PATTERNS is a comma-separated list of names or globs; DIST defaults to uniform; GROUP makes every part
    of the option (and of any other option naming the same group) move together.

    >>> parse_vary_option("R1,R2=1%:normal@pair")
    Vary(parts=('r1', 'r2'), tol_rel=0.01, tol_abs=None, dist='normal', group='pair', why='')
    """
    if "=" not in text:
        raise SpreadError(f"cannot read --vary {text[:60]!r}; write {_OPTION_FORM}")
    names, _, rest = text.partition("=")
    rest, _, group = rest.partition("@")
    tol, _, dist = rest.partition(":")
    rel, absolute = parse_tolerance(tol.strip())
    group_name = group.strip().lower() or None
    return Vary(_patterns(names), rel, absolute, _dist(dist or "uniform"), group_name, "")


def _case_err(path: Path, key: str, message: str) -> CaseFileError:
    return CaseFileError(f"{path}: key '{key}': {message}")


def _one_vary(path: Path, key: str, item: dict[str, Any]) -> Vary:
    unknown = set(item) - VARY_KEYS
    if unknown:
        raise _case_err(path, key, f"unknown key(s) {sorted(unknown)}; a [[vary]] knows {', '.join(sorted(VARY_KEYS))}")
    for needed in ("parts", "tol"):
        if needed not in item:
            raise _case_err(path, key, f'each [[vary]] needs parts = ["R*"] and tol = "1%" (no {needed} given)')
    raw_parts = item["parts"]
    if isinstance(raw_parts, str):
        raw_parts = [raw_parts]
    if not (isinstance(raw_parts, list) and raw_parts and all(isinstance(p, str) for p in raw_parts)):
        raise _case_err(path, f"{key}.parts", 'must be a name or a list of names in quotes, like ["R1", "Xfilt.*"]')
    texts: dict[str, Any] = {}
    for name in ("dist", "group", "why"):
        if name in item and not isinstance(item[name], str):
            raise _case_err(path, f"{key}.{name}", f"must be a string in quotes (got {type(item[name]).__name__})")
        texts[name] = item.get(name, "")
    try:
        parts = _patterns(",".join(raw_parts))
        if "," in "".join(raw_parts):
            raise SpreadError("a part name holds a comma; give each name as its own string in the list")
    except SpreadError as exc:
        raise _case_err(path, f"{key}.parts", str(exc)) from None
    try:
        rel, absolute = parse_tolerance(item["tol"])
    except SpreadError as exc:
        raise _case_err(path, f"{key}.tol", str(exc)) from None
    try:
        dist = _dist(texts["dist"] or "uniform")
    except SpreadError as exc:
        raise _case_err(path, f"{key}.dist", str(exc)) from None
    return Vary(parts, rel, absolute, dist, texts["group"].strip().lower() or None, texts["why"])


def vary_from_case(path: Path, data: Mapping[str, Any]) -> tuple[Vary, ...]:
    """The ``[[vary]]`` tables of a case file (already read and structure-checked); errors name the key."""
    raw = data.get("vary", [])
    if not isinstance(raw, list):
        raise _case_err(path, "vary", f"must be written as [[vary]] tables (got {type(raw).__name__})")
    out = []
    for i, item in enumerate(raw, start=1):
        if not isinstance(item, dict):
            raise _case_err(path, f"vary[{i}]", f"each [[vary]] must be a table (got {type(item).__name__})")
        out.append(_one_vary(path, f"vary[{i}]", item))
    return tuple(out)


def part_label(element_name: str) -> str:
    """The name users write for an element: ``r.xfilt.r1`` (flattened) -> ``xfilt.r1``; ``r1`` stays."""
    head, dot, rest = element_name.partition(".")
    return rest if dot and len(head) == 1 else element_name


def _varied(element: Any, vary: Vary, excitation: str) -> VariedPart:
    label = part_label(element.name)
    if element.kind in SOURCE_KINDS:
        parameter = "dc_value" if excitation == "dc" else "ac_mag"
    elif element.kind in VALUE_KINDS:
        parameter = "value"
    else:
        raise SpreadError(f"{label} is a {element.kind} element, whose value cannot vary; remove it from the pattern")
    nominal = float(getattr(element, parameter))
    if element.kind == "R" and nominal == 0.0:
        raise SpreadError(f"{label} is an ideal short (R = 0), which cannot vary; give it a resistance or leave it out")
    delta = vary.tol_abs if vary.tol_abs is not None else abs(nominal) * (vary.tol_rel or 0.0)
    if delta == 0.0:
        raise SpreadError(
            f"{label} has {parameter} = 0, so a relative tolerance gives no spread; give an absolute tolerance"
        )
    part = VariedPart(label, element.name, element.kind, parameter, nominal, delta, vary.dist, vary.group)
    if element.kind in "RLC" and nominal > 0 and part.low <= 0:
        raise SpreadError(f"{label} = {nominal:g} would reach {part.low:g} at its low end; give a smaller tolerance")
    if element.kind == "K" and (part.high > 1.0 or part.low <= 0.0):
        raise SpreadError(f"{label}: coupling {nominal:g} +- {delta:g} leaves (0, 1]; give a smaller tolerance")
    return part


def resolve(network: Network, spec: SpreadSpec | Sequence[Vary]) -> list[VariedPart]:
    """The varied parts of ``network``, in netlist order; patterns match labels (``part_label``) by fnmatch.

    ``*`` matches dots too (``"X1.*"`` is everything inside X1; ``"R*"`` only top-level resistors, since an
    inner label starts with its instance). A pattern that matches nothing, a part named by two entries and a
    group mixing distributions are errors.
    """
    varies = spec.varies if isinstance(spec, SpreadSpec) else tuple(spec)
    chosen: dict[str, tuple[Any, Vary, str]] = {}
    labels = [(part_label(e.name), e) for e in network.elements]
    for vary in varies:
        for pattern in vary.parts:
            hits = [(label, e) for label, e in labels if fnmatch.fnmatchcase(label, pattern)]
            if not hits:
                sample = ", ".join(label for label, _ in labels[:8])
                raise SpreadError(f"the part pattern {pattern!r} matches no element; the elements are {sample} ...")
            for label, e in hits:
                if label in chosen and chosen[label][1] is not vary:
                    raise SpreadError(
                        f"{label} is named by both {chosen[label][2]!r} and {pattern!r}; narrow one pattern"
                    )
                chosen[label] = (e, vary, pattern)
    parts = [_varied(e, vary, network.excitation) for e, vary, _ in chosen.values()]
    order = {part_label(e.name): i for i, e in enumerate(network.elements)}
    parts.sort(key=lambda p: order[p.name])
    dists: dict[str, str] = {}
    for p in parts:
        if p.group is not None and dists.setdefault(p.group, p.dist) != p.dist:
            raise SpreadError(f"group {p.group!r} mixes the distributions {dists[p.group]} and {p.dist}; use one")
    return parts


def apply_values(network: Network, parts: Sequence[VariedPart], values: Mapping[str, float]) -> Network:
    """The network with each named part (``VariedPart.name``) at the given value; other parts stay nominal."""
    by_element = {p.element: p for p in parts if p.name in values}
    if len(by_element) != len(values):
        unknown = sorted(set(values) - {p.name for p in parts})
        raise SpreadError(f"no varied part is called {unknown[:3]}; name parts as resolve() does")
    changes: dict[str, Any] = {}
    return network.with_elements(
        replace(e, **{**changes, by_element[e.name].parameter: float(values[by_element[e.name].name])})
        if e.name in by_element
        else e
        for e in network.elements
    )

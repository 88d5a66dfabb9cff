"""Worst case over the tolerance box: first order from the sensitivities, confirmed and refined over corners.

A target is one function of one quantity (``abs(zth)``, ``phase_deg(vth)``...). Its gradient over the
groups' normalised deviations u (each in [-1, 1]) comes from the adjoint sensitivities; the first-order
maximum is at u = sign(gradient) and the minimum at the opposite corner, and the linear estimate is the
nominal value plus or minus the sum of |gradient|. Each such corner is then solved exactly. Near a
resonance the response is not monotonic in every part and the first-order corner need not be the
extreme: a local search flips one group at a time, keeps the best flip while it improves, and stops after
``SEARCH_ROUNDS`` rounds. It tries only groups that could be on the wrong side: those whose first-order
effect (twice |gradient| for a flip) is within ``BEND_FACTOR`` times what the linear estimate missed at the
corner, the ``SEARCH_GROUPS`` largest of them; a response that is linear to rounding tries none. Every target
of a frequency is searched in the same batch of solves. Each extreme says which method found it.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

FIRST_ORDER = "first-order corner"
CORNER_SEARCH = "corner search"
SAMPLE = "monte carlo sample"
#: The groups a corner search may flip (those with the largest first-order effect on the target).
SEARCH_GROUPS = 8
#: A group is a candidate for a flip when twice its first-order effect is at most this many times what the
#: linear estimate missed at the current corner.
BEND_FACTOR = 4.0
#: Where the corner missed the linear estimate by more than this share of the first-order half-width, the
#: response bends enough that the bend rule also picks groups to flip.
BEND_SHARE = 0.05
#: A flip must gain more than this share of the first-order half-width (and 1e-9 of the value) to be kept:
#: a smaller gain moves the extreme by less than a ten-thousandth of the spread, not worth another round.
MIN_GAIN = 1e-4
#: Rounds of single flips a corner search makes at most.
SEARCH_ROUNDS = 4
FUNCTIONS = ("abs", "phase_deg", "re", "im", "db")


def quantities(vth: np.ndarray, zth: np.ndarray) -> dict[str, np.ndarray]:
    """vth, zth, in (= vth/zth) and yn (= 1/zth) from port values of any shape."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return {"vth": vth, "zth": zth, "in": vth / zth, "yn": 1.0 / zth}


def quantity_slopes(vth: complex, zth: complex, dv: np.ndarray, dz: np.ndarray) -> dict[str, np.ndarray]:
    """dq/dp of each quantity from dV_th/dp and dZ_th/dp (quotient rule)."""
    return {"vth": dv, "zth": dz, "in": (dv * zth - vth * dz) / zth**2, "yn": -dz / zth**2}


def function_value(fn: str, q: np.ndarray | complex, nominal: complex) -> np.ndarray:
    """``fn`` of q; phase in degrees, unwrapped about the nominal phase (no jump at ±180° inside a spread)."""
    with np.errstate(all="ignore"):  # a quantity that is exactly 0 (or underflows) gives inf or NaN, not a warning
        return _function_value(fn, np.asarray(q), nominal)


def _function_value(fn: str, q: np.ndarray, nominal: complex) -> np.ndarray:
    if fn == "abs":
        return np.abs(q)
    if fn == "re":
        return q.real
    if fn == "im":
        return q.imag
    if fn == "db":
        return 20.0 * np.log10(np.abs(q))
    if fn == "phase_deg":
        base = math.degrees(np.angle(nominal)) if nominal != 0 else 0.0
        reference = nominal if nominal != 0 else 1.0
        return base + np.degrees(np.angle(q / reference))
    raise ValueError(f"unknown function {fn!r}; use one of {', '.join(FUNCTIONS)}")


def function_slope(fn: str, q: complex, dq: np.ndarray) -> np.ndarray:
    """d fn(q)/dp from dq/dp (P,); NaN or inf where q is exactly 0 (|q| and phase have no slope there)."""
    with np.errstate(all="ignore"):
        return _function_slope(fn, q, dq)


def _function_slope(fn: str, q: complex, dq: np.ndarray) -> np.ndarray:
    if fn == "abs":
        return (np.conj(q) * dq).real / abs(q)
    if fn == "re":
        return dq.real
    if fn == "im":
        return dq.imag
    if fn == "db":
        return 20.0 / math.log(10.0) * (dq / q).real
    if fn == "phase_deg":
        return np.degrees((dq / q).imag)
    raise ValueError(f"unknown function {fn!r}; use one of {', '.join(FUNCTIONS)}")


@dataclass
class Found:
    """One end (min or max) of one target: its value, the corner u (per group), how it was found."""

    value: float
    u: np.ndarray
    method: str
    first_order: float


#: Exact evaluation: group deviations (B, G) -> {quantity: (B,) complex} at the frequency searched.
Evaluate = Callable[[np.ndarray], dict[str, np.ndarray]]
#: Exact slopes: group deviations (B, G) and a target per row -> d target / d u (B, G) at those corners.
Slopes = Callable[[np.ndarray, Sequence[tuple[str, str]]], np.ndarray]


def search(
    targets: Sequence[tuple[str, str]],
    nominal: dict[str, complex],
    gradients: dict[tuple[str, str], np.ndarray],
    evaluate: Evaluate,
    slopes: Slopes | None = None,
) -> dict[tuple[str, str, int], Found]:
    """The min (-1) and max (+1) of every target (quantity, function) over the corners, keyed (q, fn, ±1).

    ``slopes``: the exact gradient at a corner (one adjoint solve); a group whose slope there says the other
    end is better is always tried. Without it only the bend rule picks the groups.
    """
    ends = [(q, fn, d) for q, fn in targets for d in (-1, 1)]
    start = np.array([d * np.where(gradients[(q, fn)] >= 0, 1.0, -1.0) for q, fn, d in ends])
    values = _values(ends, _evaluated_once(start, evaluate), nominal)
    found = {}
    for i, (q, fn, d) in enumerate(ends):
        linear = float(function_value(fn, nominal[q], nominal[q])) + d * float(np.abs(gradients[(q, fn)]).sum())
        found[(q, fn, d)] = Found(float(values[i]), start[i].copy(), FIRST_ORDER, linear)
    active = list(ends)
    for _ in range(SEARCH_ROUNDS):
        active = _improve(active, found, gradients, nominal, evaluate, slopes)
        if not active:
            break
    return found


def _candidates(
    end: tuple[str, str, int], found: Found, gradient: np.ndarray, at_corner: np.ndarray | None
) -> list[int]:
    """The groups worth flipping at this end's corner, at most ``SEARCH_GROUPS``.

    Those whose exact slope at the corner points back into the box (flipping them gains to first order), and,
    where the response bends (the corner missed the linear estimate by more than ``BEND_SHARE`` of the
    first-order half-width, or no slopes are given), those whose first-order effect is within ``BEND_FACTOR``
    times what was missed: a part that is not monotonic across its tolerance can hide the extreme there.
    """
    size = np.abs(gradient)
    missed = abs(found.value - found.first_order)
    chosen: list[int] = []
    if at_corner is not None:
        back = np.flatnonzero(end[2] * at_corner * found.u < 0)
        chosen = back[np.argsort(-np.abs(at_corner[back]), kind="stable")].tolist()
    if at_corner is None or missed > BEND_SHARE * float(size.sum()):
        bend = np.flatnonzero(2.0 * size <= BEND_FACTOR * missed)
        taken = set(chosen[:SEARCH_GROUPS])
        chosen = chosen[:SEARCH_GROUPS]
        for g in bend[np.argsort(-size[bend], kind="stable")][: 2 * SEARCH_GROUPS].tolist():
            if g not in taken:
                chosen.append(g)
    return chosen[:SEARCH_GROUPS]


def _evaluated_once(corners: np.ndarray, evaluate: Evaluate) -> dict[str, np.ndarray]:
    """``evaluate`` of each row, solving each distinct corner once (min and max often share corners)."""
    first: dict[bytes, int] = {}
    where = np.array([first.setdefault(row.tobytes(), len(first)) for row in corners], dtype=np.intp)
    rows = [0] * len(first)
    for i, w in enumerate(where.tolist()):
        rows[w] = i
    return {q: v[where] for q, v in evaluate(corners[rows]).items()}


def _values(ends: Sequence[tuple[str, str, int]], qs: dict[str, np.ndarray], nominal: dict[str, complex]) -> np.ndarray:
    return np.array([function_value(fn, qs[q][i], nominal[q]) for i, (q, fn, _) in enumerate(ends)], dtype=float)


def _improve(
    active: list[tuple[str, str, int]],
    found: dict[tuple[str, str, int], Found],
    gradients: dict[tuple[str, str], np.ndarray],
    nominal: dict[str, complex],
    evaluate: Evaluate,
    slopes: Slopes | None,
) -> list[tuple[str, str, int]]:
    """One round: the single flips of each active end's candidate groups, solved in one batch; keep the best."""
    at_corner = slopes(np.array([found[e].u for e in active]), [e[:2] for e in active]) if slopes else None
    corners, owners = [], []
    for i, end in enumerate(active):
        for g in _candidates(end, found[end], gradients[end[:2]], None if at_corner is None else at_corner[i]):
            u = found[end].u.copy()
            u[g] = -u[g]
            corners.append(u)
            owners.append(end)
    if not corners:
        return []
    values = _values(owners, _evaluated_once(np.array(corners), evaluate), nominal)
    still = []
    for end in active:
        d = end[2]
        mine = [i for i, o in enumerate(owners) if o == end]
        if not mine:
            continue
        best = max(mine, key=lambda i: d * values[i])
        current = found[end]
        gain = d * (values[best] - current.value)
        # A gain below this is rounding, or too small to change any reported digit: the search stops there.
        worth = 1e-9 * abs(current.value) + MIN_GAIN * float(np.abs(gradients[end[:2]]).sum())
        if math.isfinite(values[best]) and gain > max(worth, 1e-300):
            found[end] = Found(float(values[best]), corners[best], CORNER_SEARCH, current.first_order)
            still.append(end)
    return still

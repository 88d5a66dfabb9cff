"""The one vocabulary: verdict ranking, relative error, same frequency, phasors in JSON, each defined once."""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest

import crosscheck
from crosscheck.vocabulary import (
    QUANTITIES,
    Verdict,
    phasor_json,
    quantity_name,
    quantity_unit,
    relative_error,
    same_frequency,
    worst,
)

ROOT = Path(crosscheck.__file__).parent


def test_verdicts_rank_from_mildest_to_worst():
    """A case takes the worst of its parts: error > fail > drift > unavailable > pass; none is a pass."""
    assert [v.value for v in sorted(Verdict, key=lambda v: v.rank)] == ["pass", "unavailable", "drift", "fail", "error"]
    assert worst(["pass", "drift", "unavailable"]) == Verdict.DRIFT
    assert worst(["fail", "error", "pass"]) == Verdict.ERROR
    assert worst([]) == Verdict.PASS
    with pytest.raises(ValueError):
        worst(["passed"])


def test_relative_error_against_the_reference_and_a_floor():
    """|Δ| / max(|ref|, floor): exact zero when equal, inf when nothing to divide by."""
    assert relative_error(1.0 + 1e-6, 1.0) == pytest.approx(1e-6, rel=1e-9)
    assert relative_error(3 + 4j, 3 + 4j) == 0.0
    assert relative_error(1e-3, 0.0) == math.inf
    assert relative_error(1e-3, 0.0, floor=1.0) == pytest.approx(1e-3, rel=1e-12)
    assert relative_error(2.0, 1.0, floor=4.0) == pytest.approx(0.25, rel=1e-12)  # the floor wins over |ref|


def test_same_frequency_is_one_part_in_a_billion():
    """Rounding through files and ngspice's printout (~1e-15) is the same point; a sweep step never is."""
    assert same_frequency(1e3, 1e3 * (1 + 1e-12))
    assert not same_frequency(1e3, 1e3 * (1 + 1e-8))
    assert same_frequency(0.0, 0.0) and not same_frequency(0.0, 1e-300)


def test_phasor_json_writes_non_finite_parts_in_words():
    """JSON has no inf or nan: they are written as text, never as invalid JSON."""
    assert phasor_json(None) is None
    assert phasor_json(1.5 - 2j) == {"re": 1.5, "im": -2.0}
    assert phasor_json(complex(math.inf, math.nan)) == {"re": "inf", "im": "nan"}


def test_quantity_names_and_units():
    """Every quantity a case may state has a name and an SI unit."""
    assert (quantity_name("zth"), quantity_unit("zth")) == ("Z_th", "Ω")
    assert (quantity_name("in"), quantity_unit("in")) == ("I_N", "A")
    assert set(QUANTITIES) == {"vth", "zth", "in", "yn", "series_r", "series_l", "series_c"}


#: Spellings that would define a part of the vocabulary again: a units table, a verdict tuple, a names table.
_AGAIN = (
    re.compile(r'"vth":\s*"\s*V"'),
    re.compile(r'"zth":\s*"Z_th"'),
    re.compile(r'\(\s*"pass",\s*"unavailable",\s*"drift"'),
    re.compile(r'rel_tol\s*=\s*1e-9'),
)


@pytest.mark.parametrize("path", sorted(p for p in ROOT.rglob("*.py") if p.name != "vocabulary.py"),
                         ids=lambda p: p.relative_to(ROOT).as_posix())
def test_no_module_defines_the_vocabulary_again(path: Path):
    """Units, names, the verdict order and the same-frequency tolerance are imported, never spelt again."""
    text = path.read_text(encoding="utf-8")
    found = [pattern.pattern for pattern in _AGAIN if pattern.search(text)]
    assert not found, f"{path.relative_to(ROOT)} spells part of the vocabulary again: {found}"

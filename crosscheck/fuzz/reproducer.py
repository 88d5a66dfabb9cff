"""What a fuzz run leaves behind: each shrunk failure as a netlist, a case file and both engines'
numbers, and the run's summary as JSON."""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from pathlib import Path

from crosscheck.fuzz.faults import FAULTS
from crosscheck.fuzz.generate import Knobs
from crosscheck.fuzz.judging import CaseOutcome
from crosscheck.fuzz.summary import FuzzSummary, Reproducer
from crosscheck.model.netlist_writer import write_netlist
from crosscheck.model.network import Network
from crosscheck.vocabulary import COMPARED, phasor_json


def _num(x: float) -> float | None:
    return x if math.isfinite(x) else None


def numbers_document(outcome: CaseOutcome) -> dict:
    """Both engines' numbers and the comparison, point by point (JSON-ready)."""
    points = []
    own = outcome.own or ()
    spice_points = getattr(outcome.spice, "points", ()) or ()
    for i, p in enumerate(outcome.points):
        o = own[i] if i < len(own) else None
        s = spice_points[i] if i < len(spice_points) else None
        points.append(
            {
                "freq_hz": p.freq_hz,
                "condition": _num(p.condition),
                "own": None
                if o is None
                else {"vth": phasor_json(o.vth), "zth": phasor_json(o.zth), "in": phasor_json(o.in_), "note": o.note},
                "ngspice": None
                if s is None
                else {
                    "vth": phasor_json(s.vth),
                    "zth": phasor_json(s.zth),
                    "in": phasor_json(s.isc),
                    "notes": list(s.notes),
                },
                "checks": {
                    c.quantity: {
                        "err": _num(c.err),
                        "rel_err": _num(c.rel_err),
                        "verdict": c.verdict,
                        "explanation": c.explanation,
                    }
                    for c in p.quantities
                },
                "verdict": p.verdict,
            }
        )
    return {
        "status": outcome.status,
        "explained": outcome.explained,
        "reason": outcome.reason,
        "points": points,
        "ngspice_version": getattr(outcome.spice, "ngspice_version", None),
    }


def _toml_string(text: str) -> str:
    return json.dumps(text, ensure_ascii=True)  # a JSON string is a valid TOML basic string


def regenerate_command(seed: int, knobs: Knobs) -> str:
    """The command that reruns one case alone with the knobs it was drawn with."""
    default = Knobs()
    parts = [f"crosscheck fuzz --case-seed {seed}"]
    if knobs.family != default.family:
        parts.append(f"--family {knobs.family}")
    if (knobs.min_nodes, knobs.max_nodes) != (default.min_nodes, default.max_nodes):
        parts.append(f"--nodes {knobs.min_nodes} {knobs.max_nodes}")
    if knobs.kinds != default.kinds:
        parts.append(f"--kinds {knobs.kinds}")
    return " ".join(parts)


def write_reproducer(
    out: Path, rep: Reproducer, original: CaseOutcome, knobs: Knobs, injected: Sequence[str] = ()
) -> tuple[str, ...]:
    """Netlist, case file (TOML, as ``cases.load_case`` reads it) and numbers of one shrunk failure."""
    out.mkdir(parents=True, exist_ok=True)
    stem = f"fuzz_{rep.seed}"
    case = original.case
    shrunk = rep.shrunk
    title = f"fuzz case {rep.seed} ({case.family}), shrunk"
    netlist = write_netlist(Network(title, shrunk.network.elements))
    (out / f"{stem}.cir").write_text(netlist, encoding="utf-8")
    (out / f"{stem}.original.cir").write_text(write_netlist(case.network), encoding="utf-8")
    e0, n0, f0 = shrunk.original_size
    e1, n1, f1 = shrunk.size
    fault_note = (
        f"# Found with injected fault(s) {', '.join(injected)}: the own solver was broken on purpose.\n"
        if injected
        else ""
    )
    lines = [
        f"# Found by crosscheck fuzz: case seed {rep.seed}, family {case.family}"
        f"{' (traits: ' + ', '.join(case.traits) + ')' if case.traits else ''}.",
        fault_note.rstrip("\n"),
        f"# Shrunk from {e0} elements, {n0} nodes, {f0} frequencies to {e1}, {n1}, {f1} "
        f"({shrunk.checks} checks); the original is {stem}.original.cir.",
        f"# Regenerate the original: {regenerate_command(rep.seed, knobs)}",
        f"# Outcome: {rep.outcome.status}: {rep.outcome.reason}".replace("\n", " "),
        f"# Both engines' numbers: {stem}.json",
        f"title = {_toml_string(title)}",
        f"netlist = {_toml_string(stem + '.cir')}",
        f"port = [{_toml_string(shrunk.port.a)}, {_toml_string(shrunk.port.b)}]",
        f"frequencies = [{', '.join(_toml_string(repr(f)) for f in shrunk.freqs_hz)}]",
        f'tags = ["fuzz", {_toml_string(case.family)}]',
    ]
    (out / f"{stem}.toml").write_text("\n".join(x for x in lines if x) + "\n", encoding="utf-8")
    doc = {
        "seed": rep.seed,
        "family": case.family,
        "traits": list(case.traits),
        "caveat": case.caveat,
        "faults": list(injected),
        "regenerate": regenerate_command(rep.seed, knobs),
        "shrunk": numbers_document(rep.outcome),
        "original": numbers_document(original),
        "size": {"original": list(shrunk.original_size), "shrunk": list(shrunk.size)},
        "shrink_checks": shrunk.checks,
    }
    (out / f"{stem}.json").write_text(json.dumps(doc, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    return tuple(str(out / f"{stem}{ext}") for ext in (".cir", ".toml", ".json", ".original.cir"))


def write_outputs(summary: FuzzSummary, out: Path) -> None:
    """Every reproducer, and the summary as JSON."""
    by_seed = {o.case.seed: o for o in summary.problems}
    for i, rep in enumerate(summary.reproducers):
        files = write_reproducer(out, rep, by_seed[rep.seed], summary.options.knobs, summary.faults)
        summary.reproducers[i] = Reproducer(rep.seed, rep.shrunk, rep.outcome, files)
    out.mkdir(parents=True, exist_ok=True)
    (out / "summary.json").write_text(
        json.dumps(summary_document(summary), indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
    )


def _outcome_document(o: CaseOutcome, knobs) -> dict:
    c = o.case
    return {
        "index": o.index,
        "seed": c.seed,
        "family": c.family,
        "traits": list(c.traits),
        "elements": c.size[0],
        "nodes": c.size[1],
        "port": [c.port.a, c.port.b],
        "freqs_hz": list(c.freqs_hz),
        "status": o.status,
        "explained": o.explained,
        "reason": o.reason,
        "regenerate": regenerate_command(c.seed, knobs),
    }


def summary_document(s: FuzzSummary) -> dict:
    """Everything the terminal summary says, as plain data."""
    k = s.options.knobs
    return {
        "cases": s.cases_run,
        "requested": len(s.options.case_seeds) or s.options.count,
        "seed": s.options.seed,
        "case_seeds": list(s.options.case_seeds),
        "knobs": {
            "family": k.family,
            "nodes": [k.min_nodes, k.max_nodes],
            "kinds": k.kinds,
            "decades": k.decades,
            "freq_hz": [k.min_hz, k.max_hz],
            "max_freqs": k.max_freqs,
            "dc": k.dc,
        },
        "tolerance": {"rel": s.options.tolerance.rel, "abs": s.options.tolerance.abs},
        "faults_injected": [{"name": f, "bug": FAULTS[f]} for f in s.faults],
        "verdicts": dict(s.counts),
        "explained": dict(s.explained),
        "problems": len(s.problems),
        "first_problem_at": s.first_problem_at,
        "stopped_early": s.stopped_early,
        "worst": {q: {"err": e, "seed": seed, "freq_hz": f} for q, (e, seed, f) in s.worst.items()},
        "error_percentiles": {q: s.percentiles(q) for q in COMPARED},
        "rel_error_percentiles": {q: s.percentiles(q, relative=True) for q in COMPARED},
        "compared": {q: len(s.errors[q]) for q in COMPARED},
        "failures": [_outcome_document(o, k) for o in s.problems],
        "explained_cases": [_outcome_document(o, k) for o in s.explained_cases],
        "reproducers": [
            {
                "seed": r.seed,
                "size": {"original": list(r.shrunk.original_size), "shrunk": list(r.shrunk.size)},
                "checks": r.shrunk.checks,
                "still": r.outcome.status,
                "files": list(r.files),
            }
            for r in s.reproducers
        ],
        "elapsed_s": s.elapsed_s,
        "cases_per_s": s.rate,
        "own_solver_s": s.own_s,
        "shrink_s": s.shrink_s,
        "workers": s.workers,
        "ngspice": s.ngspice_version,
    }

"""Run a netlist as written through ngspice's AC analysis, for tests that need ngspice's own value.

Tests of the reader compare what crosscheck reads with what ngspice computes from the same text, so
the expected number is measured in the test, never stored from crosscheck. The text is the test's
own (trusted), so it goes to ngspice in this process; user text only ever reaches ngspice through
the reader's accepted lines inside the isolated workers.
"""

from __future__ import annotations

import re
from types import SimpleNamespace

from crosscheck.spice.engine import Engine

_ENGINE: Engine | None = None


def _engine() -> Engine:
    global _ENGINE
    if _ENGINE is None:
        _ENGINE = Engine()
    return _ENGINE


def ngspice_ac(netlist: str, freq: float, nodes: list[str] | tuple[str, ...]) -> dict[str, complex]:
    """Each named node's voltage phasor from ngspice's ``.ac`` at ``freq`` on ``netlist`` as written.

    Any ``.end`` and ``.save`` card and ``.control`` ... ``.endc`` block is removed (crosscheck never runs those, and
    a ``run`` inside one would add a second analysis), and ``.options noopac`` plus one ``.ac lin 1 f f``
    card are added at the end.
    """
    without_control = re.sub(r"(?ims)^\s*\.control\b.*?^\s*\.endc\b[^\n]*", "", netlist)
    dropped = re.compile(r"^\s*\.(end|save)\b", re.I)  # .save would keep other vectors out of the plot
    body = "\n".join(line for line in without_control.splitlines() if not dropped.match(line))
    text = f"{body}\n.options noopac\n.ac lin 1 {freq!r} {freq!r}\n.end\n"
    plots, _ = _engine().run(SimpleNamespace(text=text))  # type: ignore[arg-type]
    # the netlist's own analysis cards may add plots of their own: ours is the one at exactly ``freq``
    (plot,) = [p for p in plots.values() if "frequency" in p and p["frequency"].real.tolist() == [freq]]
    out = {}
    for node in nodes:
        key = node.lower()
        if key in ("0", "gnd"):
            out[node] = 0j
            continue
        # ngspice names a node that starts with a digit v(3), and drops the final ')' of net-(r1-pad2)
        vector = next(plot[k] for k in (key, f"v({key})", key[:-1]) if k in plot)
        out[node] = complex(vector[0])
    return out


def ngspice_op(netlist: str, nodes: list[str] | tuple[str, ...]) -> dict[str, float]:
    """Each named node's voltage from ngspice's operating point (``.op``) on ``netlist`` as written.

    As ``ngspice_ac``: any ``.end``/``.save`` card and ``.control`` block is removed; one ``.op`` card is added.
    """
    without_control = re.sub(r"(?ims)^\s*\.control\b.*?^\s*\.endc\b[^\n]*", "", netlist)
    dropped = re.compile(r"^\s*\.(end|save)\b", re.I)
    body = "\n".join(line for line in without_control.splitlines() if not dropped.match(line))
    plots, _ = _engine().run(SimpleNamespace(text=f"{body}\n.op\n.end\n"))  # type: ignore[arg-type]
    (plot,) = [p for p in plots.values() if "frequency" not in p and "time" not in p]
    out = {}
    for node in nodes:
        key = node.lower()
        if key in ("0", "gnd"):
            out[node] = 0.0
            continue
        vector = next(plot[k] for k in (key, f"v({key})", key[:-1]) if k in plot)
        out[node] = float(vector[0].real)
    return out

"""One JSON document of equivalents, full double precision, for scripts and CI."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from crosscheck.model.network import Network, Port
from crosscheck.own.equivalent import ElementForm, Equivalent
from crosscheck.report.caution import CAUTION
from crosscheck.version import __version__
from crosscheck.vocabulary import phasor_json as phasor


def _form(form: ElementForm | None, resistive: str) -> dict[str, Any] | None:
    if form is None:
        return None
    return {resistive: form.resistance, "reactive_kind": form.reactive_kind, "reactive_value": form.reactive_value}


def own_point(eq: Equivalent) -> dict[str, Any]:
    """The own solver's answer at one frequency, with the keys shared by every engine."""
    return {
        "vth": phasor(eq.vth),
        "zth": phasor(eq.zth),
        "in": phasor(eq.in_),
        "yn": phasor(eq.yn),
        "series": _form(eq.series_form(), "r_ohm"),
        "parallel": _form(eq.parallel_form(), "g_siemens"),
        "condition": eq.condition,
        "note": eq.note or None,
    }


def equivalents_document(
    network: Network,
    port: Port,
    points: Sequence[Equivalent],
    sources: str,
    source_file: str | None = None,
    excitation: str = "ac",
) -> dict[str, Any]:

    return {
        "crosscheck_version": __version__,
        "title": network.title,
        "netlist": source_file,
        "port": [port.a, port.b],
        "sources": sources,
        "excitation": excitation,
        "points": [{"freq_hz": eq.freq_hz, "own": own_point(eq)} for eq in points],
        "caution": CAUTION,
    }

"""crosscheck: Thevenin and Norton equivalents of linear AC networks, computed twice and compared.

The public API is re-exported here; everything else is internal. In a notebook::

    import crosscheck
    result = crosscheck.reduce_netlist(Path("amp.cir"), ("out", "0"), [1e3, 10e3])
    result.own[0].zth, result.verdict
    crosscheck.results_frame(crosscheck.run_case_files(["cases/amp.toml"]))

The names are loaded on first use (PEP 562 ``__getattr__``): ``import crosscheck.cli`` and
``crosscheck --version`` then load only the modules their command needs, not the whole pipeline.
"""

from __future__ import annotations

import importlib as _importlib
import typing as _typing

from crosscheck.version import __version__ as __version__

if _typing.TYPE_CHECKING:  # the same names, for type checkers and readers; at run time __getattr__ loads them
    from crosscheck.api import reduce_netlist, results_frame, run_case_files
    from crosscheck.errors import (
        CaseFileError,
        CrosscheckError,
        EngineUnavailableError,
        Location,
        NetlistError,
        NetworkError,
        PortError,
        ReferenceEngineError,
        SingularNetworkError,
        ValueSyntaxError,
    )
    from crosscheck.judge.result import CaseResult
    from crosscheck.model.cases import Case, load_case
    from crosscheck.model.netlist import read_netlist, read_netlist_file
    from crosscheck.model.network import Element, Network, Port, make_element
    from crosscheck.model.tolerance import Tolerance
    from crosscheck.model.validation import validate
    from crosscheck.model.values import format_eng, format_polar, format_rect, parse_number, parse_phasor
    from crosscheck.own.equivalent import ElementForm, Equivalent, thevenin
    from crosscheck.vocabulary import Verdict

#: Each public name and the module it comes from (the same as the imports above).
_HOMES: dict[str, str] = {
    **dict.fromkeys(("reduce_netlist", "results_frame", "run_case_files"), "crosscheck.api"),
    **dict.fromkeys(
        (
            "CaseFileError",
            "CrosscheckError",
            "EngineUnavailableError",
            "Location",
            "NetlistError",
            "NetworkError",
            "PortError",
            "ReferenceEngineError",
            "SingularNetworkError",
            "ValueSyntaxError",
        ),
        "crosscheck.errors",
    ),
    "CaseResult": "crosscheck.judge.result",
    **dict.fromkeys(("Case", "load_case"), "crosscheck.model.cases"),
    **dict.fromkeys(("read_netlist", "read_netlist_file"), "crosscheck.model.netlist"),
    **dict.fromkeys(("Element", "Network", "Port", "make_element"), "crosscheck.model.network"),
    "Tolerance": "crosscheck.model.tolerance",
    "validate": "crosscheck.model.validation",
    **dict.fromkeys(
        ("format_eng", "format_polar", "format_rect", "parse_number", "parse_phasor"), "crosscheck.model.values"
    ),
    **dict.fromkeys(("ElementForm", "Equivalent", "thevenin"), "crosscheck.own.equivalent"),
    "Verdict": "crosscheck.vocabulary",
}


def __getattr__(name: str) -> object:
    """A public name, imported from its module on first use and kept here."""
    home = _HOMES.get(name)
    if home is None:
        raise AttributeError(f"module 'crosscheck' has no attribute {name!r}")
    value = getattr(_importlib.import_module(home), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_HOMES))


__all__ = [
    "Case",
    "CaseFileError",
    "CaseResult",
    "CrosscheckError",
    "Element",
    "ElementForm",
    "EngineUnavailableError",
    "Equivalent",
    "Location",
    "NetlistError",
    "Network",
    "NetworkError",
    "Port",
    "PortError",
    "ReferenceEngineError",
    "SingularNetworkError",
    "Tolerance",
    "ValueSyntaxError",
    "Verdict",
    "format_eng",
    "format_polar",
    "format_rect",
    "load_case",
    "make_element",
    "parse_number",
    "parse_phasor",
    "read_netlist",
    "read_netlist_file",
    "reduce_netlist",
    "results_frame",
    "run_case_files",
    "thevenin",
    "validate",
]

"""crosscheck: Thevenin and Norton equivalents of linear AC networks, computed twice and compared.

The public API is re-exported here; everything else is internal. In a notebook::

    import crosscheck
    result = crosscheck.reduce_netlist(Path("amp.cir"), ("out", "0"), [1e3, 10e3])
    result.own[0].zth, result.verdict
    crosscheck.results_frame(crosscheck.run_case_files(["cases/amp.toml"]))
"""

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
from crosscheck.version import __version__ as __version__
from crosscheck.vocabulary import Verdict

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

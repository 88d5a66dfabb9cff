"""crosscheck: Thevenin and Norton equivalents of linear AC networks, computed twice and compared.

The public API is re-exported here; everything else is internal.
"""

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
from crosscheck.model.network import Element, Network, Port, make_element, validate
from crosscheck.model.values import format_eng, format_polar, format_rect, parse_number, parse_phasor
from crosscheck.own.equivalent import ElementForm, Equivalent, thevenin
from crosscheck.version import __version__

__all__ = [
    "CaseFileError",
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
    "ValueSyntaxError",
    "format_eng",
    "format_polar",
    "format_rect",
    "make_element",
    "parse_number",
    "parse_phasor",
    "thevenin",
    "validate",
]

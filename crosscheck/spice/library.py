"""The ngspice shared library: finding it, whether it loads, what it is (version, matrix solver).

Nothing here starts an engine or imports PySpice at module level (``ngspice_available`` only asks
whether PySpice is installed), so it is safe in any process; ``engine`` starts the engine.
"""

from __future__ import annotations

import ctypes
import importlib.util
import os
from collections.abc import Sequence

from crosscheck.errors import EngineUnavailableError

INSTALL_COMMAND = "sudo apt-get install -y libngspice0 libngspice0-dev"
_LIBRARY_CANDIDATES = ("libngspice.so", "libngspice.so.0")


def ngspice_available(library: str | None = None) -> str | None:
    """None when PySpice is installed and ngspice's shared library loads; otherwise why not, and the fix.

    Loads the library without starting an engine, so it is safe in any process.
    """
    if importlib.util.find_spec("PySpice") is None:
        return "PySpice is not installed in this Python environment; install it with: pip install 'PySpice>=1.5'"
    try:
        library_path(library)
    except EngineUnavailableError as exc:
        return str(exc)
    return None


def library_path(library: str | None = None) -> str:
    """The shared library to load: an explicit one, $NGSPICE_LIBRARY_PATH, or the system's.

    Debian's ``libngspice0`` alone provides only ``libngspice.so.0``; ``-dev`` adds ``libngspice.so``.
    """
    candidates = (
        [library]
        if library
        else (
            [os.environ["NGSPICE_LIBRARY_PATH"]]
            if os.environ.get("NGSPICE_LIBRARY_PATH")
            else list(_LIBRARY_CANDIDATES)
        )
    )
    reasons = []
    for path in candidates:
        try:
            ctypes.CDLL(path)
        except OSError as exc:
            reasons.append(str(exc))
            continue
        return path
    raise EngineUnavailableError(
        f"ngspice's shared library could not be loaded ({'; '.join(reasons)}); install it with: {INSTALL_COMMAND}"
    )


#: How big a library may be for the KLU scan (a real libngspice is 5-15 MB).
_LIBRARY_SCAN_BYTES = 64 << 20


def library_has_klu(path: str) -> bool:
    """True when ngspice's shared library at ``path`` was built with KLU, so ``.options klu`` selects it.

    Why not ask ngspice: the packaged ngspice 39 accepts ``.options klu`` (and any unknown option) in
    silence and prints the same lines and ``option`` listing either way, so its words cannot tell. A
    KLU build carries KLU's code and its messages: either the symbol ``klu_z_factor`` resolves through
    the library (KLU linked as its own library) or the library's bytes name ``klu`` (KLU compiled in;
    ngspice hides its internal symbols). The packaged library here has neither (checked with ``strings``
    and ``ldd``), and timing agreed: the option changed nothing (``deck``'s docstring).
    """
    real = os.path.realpath(path if os.sep in path else (_loaded_path(path) or path))
    try:
        if os.path.isfile(real) and os.path.getsize(real) <= _LIBRARY_SCAN_BYTES:
            with open(real, "rb") as fh:
                data = fh.read()
            if b"klu_" in data or b"KLU" in data:
                return True
        return hasattr(ctypes.CDLL(path), "klu_z_factor")
    except OSError:
        return False


def _loaded_path(name: str) -> str | None:
    """Where the dynamic loader found the library ``name`` (a bare name like ``libngspice.so.0``)."""
    try:
        with open("/proc/self/maps", encoding="utf-8", errors="replace") as maps:
            for line in maps:
                where = line.rstrip("\n").split(maxsplit=5)[-1]
                if os.path.basename(where).startswith(name):
                    return where
    except OSError:
        return None
    return None


def solver_text(klu: bool) -> str:
    """The matrix solver ngspice uses, for the version line every report shows."""
    return "KLU solver" if klu else "Sparse 1.3 solver (this library has no KLU)"


def version_text(banner: Sequence[str], number: int | None) -> str:
    build = next((line.split(":", 1)[1].strip() for line in banner if "Creation Date" in line), None)
    name = f"ngspice-{number}" if number is not None else "ngspice (version not reported)"
    return f"{name} shared library, built {build}" if build else f"{name} shared library"

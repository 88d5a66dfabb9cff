"""SuiteSparse's KLU called directly through ctypes: analyse, factor, refactor and solve.

Written by hand because no maintained Python package exposes what a frequency sweep needs at
a cost that fits a 1,000-node network: kvxopt's ``klu`` module copies every right-hand side
into its own matrix type, has no refactorization, and its call overhead is a large part of a
1,000-node network's time per frequency. Here a
right-hand side goes to KLU as numpy's own memory (complex128 is KLU's interleaved
real/imaginary layout) and ``klu_z_refactor`` reuses the pivot order of the last full
factorization. ctypes releases the GIL during each call, so threads factor in parallel.
(KLU's own ``klu_z_condest`` is not bound: it is no faster than the solver's Higham estimator.)

The library is Debian's ``libklu1`` (``apt-get install libklu1``; ``make test`` installs it as
root), else the copy inside the kvxopt wheel (``pip install 'crosscheck[fast]'``). The layout of
``klu_common`` changed between SuiteSparse releases (four allocator pointers were dropped), so
the layout is not assumed: ``klu_defaults`` fills a struct and the layout whose fields read back
KLU's documented defaults is the one used; a library that matches neither is not used.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import functools
import glob
import importlib.util
import os

import numpy as np

from crosscheck.errors import CrosscheckError

_I = ctypes.c_int
_D = ctypes.c_double
_P = ctypes.c_void_p
_KLU_SINGULAR = 1


def _common_fields(with_allocators: bool) -> list[tuple[str, type]]:
    allocators = [(f"{n}_memory", _P) for n in ("malloc", "realloc", "free", "calloc")] if with_allocators else []
    return (
        [(n, _D) for n in ("tol", "memgrow", "initmem_amd", "initmem", "maxwork")]
        + [("btf", _I), ("ordering", _I), ("scale", _I)]
        + allocators
        + [
            ("user_order", _P),
            ("user_data", _P),
            ("halt_if_singular", _I),
            ("status", _I),
            ("nrealloc", _I),
            ("structural_rank", _I),
            ("numerical_rank", _I),
            ("singular_col", _I),
            ("noffdiag", _I),
        ]
        + [(n, _D) for n in ("flops", "rcond", "condest", "rgrowth", "work")]
        + [("memusage", ctypes.c_size_t), ("mempeak", ctypes.c_size_t)]
    )


class _CommonOld(ctypes.Structure):  # SuiteSparse 4.x: allocator pointers in the struct
    _fields_ = _common_fields(True)


class _CommonNew(ctypes.Structure):  # later releases: allocators live in SuiteSparse_config
    _fields_ = _common_fields(False)


def _reads_defaults(common: ctypes.Structure) -> bool:
    """klu_defaults documents these values; a struct of the right layout reads them all back."""
    return (
        common.tol == 0.001
        and common.memgrow == 1.2
        and common.initmem == 10.0
        and common.btf == 1
        and common.scale == 2
        and common.halt_if_singular == 1
        and common.status == 0
        and common.structural_rank == -1
        and common.numerical_rank == -1
        and common.noffdiag == -1
    )


def library_paths() -> list[str]:
    """Where a KLU shared library may be, preferred first: the system's, then kvxopt's bundled copy."""
    found = [p for p in (ctypes.util.find_library("klu"), "libklu.so.2", "libklu.so.1") if p]
    spec = importlib.util.find_spec("kvxopt")
    if spec is not None and spec.submodule_search_locations:
        for location in spec.submodule_search_locations:
            found += sorted(glob.glob(os.path.join(os.path.dirname(location), "kvxopt.libs", "libklu*.so*")))
    return found


class KluLibrary:
    """One loaded libklu with its argument types declared and its struct layout checked."""

    def __init__(self, path: str) -> None:
        lib = ctypes.CDLL(path)
        self.path = path
        for layout in (_CommonNew, _CommonOld):
            buffer = (ctypes.c_char * 1024)()  # room for either layout; klu_defaults writes only its own
            common = layout.from_buffer(buffer)
            lib.klu_defaults(ctypes.byref(common))
            if _reads_defaults(common):
                self.common_type = layout
                break
        else:
            raise OSError(f"{path}: klu_common's layout is not one this binding knows")
        ptr = ctypes.POINTER
        common_p = ptr(self.common_type)
        declare = {
            "klu_defaults": (_I, [common_p]),
            "klu_analyze": (_P, [_I, _P, _P, common_p]),
            "klu_z_factor": (_P, [_P, _P, _P, _P, common_p]),
            "klu_z_refactor": (_I, [_P, _P, _P, _P, _P, common_p]),
            "klu_z_solve": (_I, [_P, _P, _I, _I, _P, common_p]),
            "klu_z_tsolve": (_I, [_P, _P, _I, _I, _P, _I, common_p]),
            "klu_free_symbolic": (_I, [ptr(_P), common_p]),
            "klu_z_free_numeric": (_I, [ptr(_P), common_p]),
        }
        for name, (restype, argtypes) in declare.items():
            function = getattr(lib, name)
            function.restype, function.argtypes = restype, argtypes
        self.lib = lib

    def new_common(self) -> ctypes.Structure:
        """KLU's defaults, except no row scaling (``scale = 0``; the default 2 scales by each row's largest
        entry): refactorizations and solves take little more than half the time. The pivots are then
        chosen on the unscaled matrix, as SPICE's own sparse
        solver does; the solver checks every solve's backward error and refines or pivots afresh."""
        common = self.common_type()
        self.lib.klu_defaults(ctypes.byref(common))
        common.scale = 0
        return common


@functools.lru_cache(maxsize=1)
def load() -> KluLibrary | None:
    """The first usable KLU library, or None (then ``sparse_backends`` uses another back end)."""
    for path in library_paths():
        try:
            return KluLibrary(path)
        except (OSError, AttributeError):
            continue
    return None


class KluError(CrosscheckError, ArithmeticError):
    """KLU refused: ``singular`` when it met a zero pivot, else an out-of-memory or invalid-input status."""

    def __init__(self, message: str, singular: bool) -> None:
        super().__init__(message)
        self.singular = singular


_STATUS = {
    -2: "out of memory: the factors do not fit; try a smaller network or CROSSCHECK_SPARSE=superlu",
    -3: "invalid input: a bug in crosscheck's matrix assembly; please report it with the netlist",
    -4: "integer overflow: the network is too large for KLU's 32-bit indices; try CROSSCHECK_SPARSE=superlu",
}


def _error(call: str, common: ctypes.Structure) -> KluError:
    if common.status == _KLU_SINGULAR:
        return KluError(f"KLU: singular matrix (zero pivot in column {common.singular_col})", singular=True)
    meaning = _STATUS.get(common.status, "an unknown failure")
    return KluError(f"{call} failed (KLU status {common.status}: {meaning})", singular=False)


class Symbolic:
    """klu_analyze of one CSC pattern (BTF, then AMD per block): made once, factors any values on the pattern."""

    def __init__(self, library: KluLibrary, indptr: np.ndarray, indices: np.ndarray) -> None:
        self._library = library
        self.n = len(indptr) - 1
        self.indptr = np.ascontiguousarray(indptr, dtype=np.intc)
        self.indices = np.ascontiguousarray(indices, dtype=np.intc)
        # The pattern's addresses, read once (numpy's ``.ctypes.data`` costs ~1.5 µs a call); the arrays
        # above keep the memory alive.
        self.pattern_pointers = (self.indptr.ctypes.data, self.indices.ctypes.data)
        self.common = library.new_common()
        self._handle = library.lib.klu_analyze(self.n, *self.pattern_pointers, ctypes.byref(self.common))
        if not self._handle:
            raise KluError(f"klu_analyze failed (status {self.common.status})", singular=False)

    @property
    def library(self) -> KluLibrary:
        return self._library

    @property
    def estimated_flops(self) -> float:
        """The ordering's estimate of one factorization's floating-point operations (``est_flops``).

        Read from the head of KLU's ``klu_symbolic``, whose first fields are ``double symmetry, est_flops,
        lnz, unz`` in every KLU release (1.x to 2.x); the fill-based choice of back end reads it."""
        return float(ctypes.cast(self._handle, ctypes.POINTER(_D * 4)).contents[1])

    @property
    def handle(self) -> int:
        """The address of KLU's symbolic object (for the compiled sweep loop, ``sweep_kernel``)."""
        return self._handle

    def factor(self, values: np.ndarray) -> Numeric:
        """A full factorization with threshold partial pivoting (pivot order chosen afresh).

        Each factorization has its own ``klu_common`` (KLU writes statistics there), so factorizations
        of one Symbolic may be made and used in different threads; the Symbolic itself is only read.
        """
        values = np.ascontiguousarray(values, dtype=complex)
        common = self._library.new_common()
        handle = self._library.lib.klu_z_factor(
            *self.pattern_pointers, values.ctypes.data, self._handle, ctypes.byref(common)
        )
        if not handle:
            raise _error("klu_z_factor", common)
        return Numeric(self, handle, common)

    def __del__(self) -> None:
        if getattr(self, "_handle", None):
            handle = _P(self._handle)
            self._library.lib.klu_free_symbolic(ctypes.byref(handle), ctypes.byref(self.common))
            self._handle = None


class Numeric:
    """The LU factors of one matrix; ``refactor`` overwrites them with another matrix's on the same pivot order."""

    def __init__(self, symbolic: Symbolic, handle: int, common: ctypes.Structure) -> None:
        self._symbolic = symbolic  # kept alive: the factors refer to its ordering
        self._handle = handle  # 0 once freed
        self._common = common
        self._common_ref = ctypes.byref(common)
        lib = symbolic._library.lib
        self._refactor, self._solve, self._tsolve = lib.klu_z_refactor, lib.klu_z_solve, lib.klu_z_tsolve

    @property
    def handle(self) -> int:
        """The address of KLU's numeric object (for the compiled sweep loop, ``sweep_kernel``)."""
        return self._handle

    @property
    def common_address(self) -> int:
        """The address of this factorization's ``klu_common``."""
        return ctypes.addressof(self._common)

    def refactor(self, values: np.ndarray) -> None:
        """New values, the pivot order of the last full ``factor`` (no pivot search: faster, and unchecked)."""
        s = self._symbolic
        values = np.ascontiguousarray(values, dtype=complex)
        if not self._refactor(*s.pattern_pointers, values.ctypes.data, s._handle, self._handle, self._common_ref):
            raise _error("klu_z_refactor", self._common)

    def solve(self, b: np.ndarray, adjoint: bool = False) -> np.ndarray:
        """A⁻¹·b (or A⁻ᴴ·b) for one vector or a block of columns; ``b`` is not changed."""
        s = self._symbolic
        b = np.asarray(b, dtype=complex)
        x = np.array(b.reshape(b.shape[0], -1), dtype=complex, order="F")  # a copy: KLU overwrites it
        if adjoint:
            ok = self._tsolve(s._handle, self._handle, s.n, x.shape[1], x.ctypes.data, 1, self._common_ref)
        else:
            ok = self._solve(s._handle, self._handle, s.n, x.shape[1], x.ctypes.data, self._common_ref)
        if not ok:
            raise _error("klu_z_solve", self._common)
        return x.reshape(b.shape)

    def __del__(self) -> None:
        if getattr(self, "_handle", None):
            handle = _P(self._handle)
            self._symbolic._library.lib.klu_z_free_numeric(ctypes.byref(handle), ctypes.byref(self._common))
            self._handle = 0

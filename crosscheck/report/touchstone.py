"""Touchstone export: a reduction's Z, Y or S matrices over its frequencies, as an ``.sNp`` file.

Touchstone is an open standard for exchanging N-port network data (IBIS Open Forum: "Touchstone File Format
Specification" Rev 1.1, 2002, and Version 2.0, 2009). What this writer follows, read in those texts:

* the option line ``# Hz <Z|Y|S> RI R <ohms>``: frequencies in hertz, each entry as a real and imaginary part;
* comment lines start with ``!``; only printable ASCII is allowed, so user text is made ASCII here;
* 1 and 2 ports: one line per frequency; a 2-port line holds N11 N21 N12 N22 (N21 before N12, the 1.x order,
  which 2.0 keeps under ``[Two-Port Data Order] 21_12``); 3 ports and more: each matrix row starts a new line
  and a line holds at most four entries (real-imaginary pairs), the first line beginning with the frequency;
* in version 1.1 Z and Y are NORMALISED by the reference resistance R (the file holds Z/R and Y*R); in 2.0
  they are not (the file holds ohms and siemens, and R applies to S alone). S is always relative to R;
* 2.0 adds ``[Version] 2.0`` before the option line, then ``[Number of Ports]``, ``[Two-Port Data Order]``
  (2 ports only), ``[Number of Frequencies]``, ``[Reference]`` (one resistance per port), ``[Network Data]``
  before the numbers and ``[End]`` after them.

S is computed from Z for one common real reference ``z0``: ``S = (Z - z0 I)(Z + z0 I)^-1`` (the usual
power-wave definition with equal real references; common practice). Numbers are printed with
``SIGNIFICANT_DIGITS`` significant figures, far above what a tolerance check needs and still a readable file.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Literal

import numpy as np

from crosscheck.errors import CrosscheckError
from crosscheck.judge.baseline_file import atomic_write
from crosscheck.version import __version__

if TYPE_CHECKING:
    from crosscheck.judge.result import CaseResult

Kind = Literal["Z", "Y", "S"]
Version = Literal["1.1", "2.0"]
KINDS: tuple[Kind, ...] = ("Z", "Y", "S")
VERSIONS: tuple[Version, ...] = ("1.1", "2.0")
#: Significant figures of every printed number (frequency and entries): the relative rounding of one entry
#: is at most 5e-12, which is the precision a reader of the file can rely on.
SIGNIFICANT_DIGITS = 12
#: At most this many entries (real-imaginary pairs) on one data line (both versions' rule for n >= 3).
PAIRS_PER_LINE = 4
_EXTENSION = re.compile(r"^\.s(\d+)p$", re.IGNORECASE)


class TouchstoneError(CrosscheckError, ValueError):
    """A Touchstone export that cannot be written as asked (the message says why and what to do)."""


def s_from_z(z: np.ndarray, z0: float) -> np.ndarray:
    """S = (Z - z0 I)(Z + z0 I)^-1 for one common real reference z0 (common practice); Z of shape (..., n, n)."""
    z = np.asarray(z, dtype=complex)
    eye = np.eye(z.shape[-1])
    # X @ inv(B) = solve(B^T, X^T)^T: no explicit inverse.
    plus = np.swapaxes(z + z0 * eye, -1, -2)
    minus = np.swapaxes(z - z0 * eye, -1, -2)
    return np.swapaxes(np.linalg.solve(plus, minus), -1, -2)


def _number(x: float) -> str:
    return f"{x: .{SIGNIFICANT_DIGITS - 1}e}"


def _ascii_comment(text: str) -> list[str]:
    """User or generated text as comment lines: ASCII only (others as \\uXXXX), no control characters."""
    lines = []
    for raw in str(text).splitlines() or [""]:
        shown = raw.encode("ascii", "backslashreplace").decode("ascii")
        lines.append("! " + "".join(c if " " <= c <= "~" else "?" for c in shown).rstrip())
    return lines


def _checked(freqs_hz: Sequence[float], matrices: np.ndarray, kind: str, z0: float, version: str) -> np.ndarray:
    m = np.asarray(matrices, dtype=complex)
    if m.ndim != 3 or m.shape[1] != m.shape[2] or m.shape[1] < 1:
        raise TouchstoneError(f"Touchstone data must be F square matrices (F, n, n); got shape {m.shape}")
    if m.shape[0] != len(freqs_hz) or not freqs_hz:
        raise TouchstoneError(f"{len(freqs_hz)} frequencies for {m.shape[0]} matrices: give one matrix per frequency")
    f = np.asarray(freqs_hz, dtype=float)
    if not np.all(np.isfinite(f)) or f[0] < 0 or np.any(np.diff(f) <= 0):
        raise TouchstoneError(
            f"Touchstone needs frequencies >= 0 Hz in strictly increasing order; got {list(freqs_hz)}: "
            "sort the frequencies and drop repeats"
        )
    if kind not in KINDS:
        raise TouchstoneError(f"Touchstone kind {kind!r} is not one of Z, Y, S: choose one of them")
    if version not in VERSIONS:
        raise TouchstoneError(f"Touchstone version {version!r} is not 1.1 or 2.0: choose one of them")
    if not (np.isfinite(z0) and z0 > 0):
        raise TouchstoneError(f"reference impedance {z0!r} ohm is not a positive real number: give one, e.g. 50")
    if not np.all(np.isfinite(m)):
        raise TouchstoneError(
            f"the {kind} matrices hold an infinite or undefined entry: the network has no {kind} form at some "
            "frequency; export another kind (S exists wherever Z does)"
        )
    return m


def _data_lines(freq: float, matrix: np.ndarray) -> list[str]:
    """One frequency's entries under the line rules of the module docstring."""
    n = matrix.shape[0]
    if n <= 2:
        rows = [list(matrix.T.ravel())]  # column-major: N11 (N21 N12 N22), the 1.x order
    else:
        rows = [list(matrix[i]) for i in range(n)]
    lines: list[str] = []
    for row in rows:
        for start in range(0, len(row), PAIRS_PER_LINE if n > 2 else len(row)):
            chunk = row[start : start + (PAIRS_PER_LINE if n > 2 else len(row))]
            body = " ".join(f"{_number(v.real)} {_number(v.imag)}" for v in chunk)
            lead = f"{freq:.{SIGNIFICANT_DIGITS - 1}e}" if not lines else " " * (SIGNIFICANT_DIGITS + 6)
            lines.append(f"{lead} {body}")
    return lines


def touchstone_text(
    freqs_hz: Sequence[float],
    matrices: np.ndarray,
    kind: Kind,
    *,
    z0: float = 50.0,
    version: Version = "1.1",
    comments: Sequence[str] = (),
) -> str:
    """The Touchstone file for ``matrices`` (shape (F, n, n), already of ``kind``, in ohms/siemens/ratio).

    Version 1.1 prints Z/z0 and Y*z0 (the standard's normalisation); 2.0 prints them as they are.
    """
    m = _checked(freqs_hz, matrices, kind, z0, version)
    n = m.shape[1]
    if version == "1.1" and kind == "Z":
        m = m / z0
    elif version == "1.1" and kind == "Y":
        m = m * z0
    ref = f"{z0:.{SIGNIFICANT_DIGITS}g}"
    out = [f"! crosscheck {__version__}: Touchstone {version}, {n}-port {kind} parameters, real and imaginary"]
    if version == "1.1" and kind != "S":
        out.append(f"! {kind} is normalised: the file holds {'Z/R' if kind == 'Z' else 'Y*R'} with R = {ref} ohm")
    for c in comments:
        out.extend(_ascii_comment(c))
    head = [f"# Hz {kind} RI R {ref}"]
    if version == "2.0":
        head = ["[Version] 2.0", *head, f"[Number of Ports] {n}"]
        head += ["[Two-Port Data Order] 21_12"] if n == 2 else []
        head += [f"[Number of Frequencies] {m.shape[0]}", "[Reference] " + " ".join([ref] * n), "[Network Data]"]
    out += head
    for f, matrix in zip(freqs_hz, m, strict=True):
        out += _data_lines(float(f), matrix)
    if version == "2.0":
        out.append("[End]")
    return "\n".join(out) + "\n"


def check_extension(path: Path, ports: int, version: str) -> None:
    """``.sNp`` must name the port count (2.0 also allows ``.ts``); raise saying the right name otherwise."""
    match = _EXTENSION.match(path.suffix)
    if version == "2.0" and path.suffix.lower() == ".ts":
        return
    if match is None or int(match.group(1)) != ports:
        raise TouchstoneError(
            f"Touchstone file {str(path)!r}: a {ports}-port export is named '.s{ports}p'"
            f"{' (or .ts for version 2.0)' if version == '2.0' else ''}: rename it, e.g. "
            f"{path.with_suffix(f'.s{ports}p').name!r}"
        )


def write_touchstone(
    path: Path | str,
    freqs_hz: Sequence[float],
    matrices: np.ndarray,
    kind: Kind,
    *,
    z0: float = 50.0,
    version: Version = "1.1",
    comments: Sequence[str] = (),
    inputs: Sequence[Path | str] = (),
) -> None:
    """``touchstone_text`` written atomically at ``path``; refuses a path that is one of ``inputs``."""
    target = Path(path)
    text = touchstone_text(freqs_hz, matrices, kind, z0=z0, version=version, comments=comments)
    check_extension(target, np.asarray(matrices).shape[1], version)
    for given in inputs:
        if _same_file(target, Path(given)):
            raise TouchstoneError(
                f"Touchstone file {str(target)!r} is an input of this run ({str(given)!r}): choose another output path"
            )
    atomic_write(target, text.encode("ascii"))


def _same_file(a: Path, b: Path) -> bool:
    try:
        return a.exists() and b.exists() and a.samefile(b)
    except OSError:
        return a.resolve() == b.resolve()


def result_matrices(result: CaseResult, kind: Kind, z0: float) -> tuple[list[float], np.ndarray, list[str]]:
    """Frequencies, matrices of ``kind`` and port names from the own route of ``result`` (one or N ports)."""
    multiport = result.multiport
    zs: list[np.ndarray | None]
    ys: list[np.ndarray | None]
    if multiport is not None:
        freqs = [float(p.freq_hz) for p in multiport.own]
        nodes: list[tuple[str, str] | None] = [*multiport.port_nodes] or [None] * len(multiport.port_names)
        names = [f"{name}" + (f" ({p[0]}, {p[1]})" if p else "") for name, p in zip(multiport.port_names, nodes)]
        zs = [p.z for p in multiport.own]
        ys = [p.y for p in multiport.own]
    elif result.own:
        freqs = [float(e.freq_hz) for e in result.own]
        names = [f"{result.port[0]}-{result.port[1]}"]
        zs = [None if _bad(e.zth) else np.array([[e.zth]]) for e in result.own]
        ys = [None if _bad(e.yn) else np.array([[e.yn]]) for e in result.own]
    else:
        raise TouchstoneError(f"case {result.name!r} has no own-route answer to export: {result.error or 'none'}")
    missing = [f for f, z, y in zip(freqs, zs, ys, strict=True) if (y if kind == "Y" else z) is None]
    if missing:
        what = "admittance (Norton) form" if kind == "Y" else "impedance (Thevenin) form"
        raise TouchstoneError(
            f"case {result.name!r} has no {what} at {', '.join(f'{f:g}' for f in missing)} Hz: "
            f"{'export Z or S' if kind == 'Y' else 'export Y'} instead, or leave those frequencies out"
        )
    if kind == "Y":
        return freqs, np.array(ys, dtype=complex), names
    z = np.array(zs, dtype=complex)
    return freqs, (s_from_z(z, z0) if kind == "S" else z), names


def _bad(value: complex | None) -> bool:
    return value is None or not np.isfinite(complex(value))


def export_from_result(
    path: Path | str, result: CaseResult, kind: Kind = "Z", z0: float = 50.0, version: Version = "1.1"
) -> Path:
    """Write ``result``'s own-route matrices (``CaseResult.multiport``, or ``own`` for one port) as Touchstone.

    Comments record the case, its title, the ports in order and the crosscheck version. The netlist and
    case file of the run are inputs: writing over them is refused."""
    freqs, matrices, names = result_matrices(result, kind, z0)
    case = result.case
    inputs = [p for p in (getattr(case, "netlist_file", None), getattr(case, "path", None)) if p]
    comments = [
        f"case: {result.name}",
        f"title: {result.title}",
        "ports (row and column order): " + ", ".join(f"{k + 1} = {n}" for k, n in enumerate(names)),
        "computed by crosscheck's own phasor MNA route; ngspice's answers are in the other reports",
    ]
    write_touchstone(path, freqs, matrices, kind, z0=z0, version=version, comments=comments, inputs=inputs)
    return Path(path)


def _ports_of(result: CaseResult) -> int:
    multiport = result.multiport
    return len(multiport.port_names) if multiport is not None else 1


def _file_name(result: CaseResult, taken: set[str]) -> str:
    """``<case file's stem>.sNp``, the stem with anything but letters, digits, ``.``, ``-``, ``_`` made ``_``; a name
    already ``taken`` (two cases of one name in different folders) gets ``-2``, ``-3``..."""
    base = Path(result.name.replace("\\", "/").split("/")[-1]).stem
    stem = re.sub(r"[^A-Za-z0-9._-]", "_", base).lstrip(".") or "case"
    name, k = f"{stem}.s{_ports_of(result)}p", 1
    while name.lower() in taken:
        k += 1
        name = f"{stem}-{k}.s{_ports_of(result)}p"
    taken.add(name.lower())
    return name


def export_cases(
    target: Path | str,
    results: Sequence[CaseResult],
    kind: Kind,
    z0: float,
    version: Version,
    *,
    one_file: bool = False,
) -> tuple[list[Path], list[str]]:
    """The command line's ``--touchstone``: one file (``one_file``, or a path ending ``.sNp``/``.ts``, for one
    case) or a folder holding one ``<case>.sNp`` per case. Returns the files written and, per case not
    written, why not."""
    where = Path(target)
    as_file = one_file or _EXTENSION.match(where.suffix) is not None or where.suffix.lower() == ".ts"
    if as_file and len(results) != 1:
        return [], [f"--touchstone {str(where)!r} names one file for {len(results)} cases: name a folder instead"]
    if not as_file and where.exists() and not where.is_dir():
        return [], [f"--touchstone {str(where)!r} is a file, and several cases need a folder: name a folder"]
    written: list[Path] = []
    problems: list[str] = []
    taken: set[str] = set()
    for result in results:
        path = where if as_file else where / _file_name(result, taken)
        try:
            written.append(export_from_result(path, result, kind, z0, version))
        except (TouchstoneError, OSError) as exc:
            problems.append(f"case {result.name!r}: Touchstone not written: {exc}")
    return written, problems

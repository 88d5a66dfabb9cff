"""A case file's TOML, read defensively: size, kind of file, symlinks, nesting, sizes and key types.

``model.cases`` turns the checked table into a ``Case``; this module makes sure the table is safe to
look at first. Every limit is documented here and each refusal names the file and the key.

Why the path is safe: a case file is opened only through ``files.read_regular`` (regular files,
never blocking, size-capped); a symlinked case file is read only when its target lies inside the
folder holding the link (the rule netlists follow), unless the user allowed outside paths.
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

from crosscheck.errors import CaseFileError
from crosscheck.model.files import InputFileError, read_regular

#: A case file larger than this is refused before it is parsed (inline netlists count).
MAX_CASE_BYTES = 4 * 2**20
#: Tables and arrays nested deeper than this are refused (a case file needs 4).
MAX_DEPTH = 8
#: Values (tables, arrays, strings, numbers) in one case file, all levels together.
MAX_VALUES = 200_000
#: A string value other than ``netlist``, ``about``, ``how`` and ``why`` is at most this long.
MAX_STRING_CHARS = 1_000
#: ``about``, ``how``, ``why`` (free text) are at most this long; ``netlist`` only by the file size.
MAX_TEXT_CHARS = 100_000
#: ``[[expect]]`` and ``[[limit]]`` entries in one case file: judging costs limits × points, so 500 limits
#: over the most points (``cases.MAX_POINTS``) take a few seconds, not minutes.
MAX_ENTRIES = 500
#: The highest frequency a case may ask for, in hertz: far above any linear AC network's use, and
#: low enough that 2·π·f times any element value stays far from overflowing a double.
MAX_FREQUENCY_HZ = 1e15

_FREE_TEXT = {"netlist", "about", "how", "why", "caution"}


def err(path: Path, key: str, message: str) -> CaseFileError:
    return CaseFileError(f"{path}: key '{key}': {message}")


def read_table(path: Path, allow_outside: bool) -> dict[str, Any]:
    """The case file's TOML table, after the file and structure checks; CaseFileError otherwise."""
    if not allow_outside and path.is_symlink():
        folder = path.parent.resolve()
        if not path.resolve().is_relative_to(folder):
            raise CaseFileError(
                f"{path}: the case file is a symbolic link to {str(path.resolve())[:200]!r}, outside its folder; "
                "keep case files inside the folder checked, or allow it explicitly (--allow-outside-paths)"
            )
    if path.is_dir():  # what ``find_case_files`` returns for a subfolder it could not list
        raise CaseFileError(
            f"{path}: a folder that could not be searched for case files (permission denied or gone); "
            "make it readable, or move it out of the folder checked"
        )
    try:
        data = read_regular(path, MAX_CASE_BYTES)
    except InputFileError as exc:
        raise CaseFileError(f"{path}: cannot read the case file: {exc}") from None
    try:
        text = data.decode("utf-8-sig")  # TOML allows a byte-order mark; it is dropped
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise CaseFileError(f"{path}: line {line}: not UTF-8 text; save the case file as UTF-8") from None
    try:
        table = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseFileError(f"{path}: not valid TOML: {exc}") from None
    except RecursionError:
        raise CaseFileError(
            f"{path}: arrays or tables nested too deeply for TOML reading; a case file nests at most {MAX_DEPTH} levels"
        ) from None
    check_structure(path, table)
    return table


def check_structure(path: Path, table: dict[str, Any]) -> None:
    """Depth, value count, string length and characters of the decoded table, walked without recursion."""
    stack: list[tuple[str, Any, int]] = [(key, value, 1) for key, value in table.items()]
    seen = 0
    while stack:
        key, value, depth = stack.pop()
        seen += 1
        if seen > MAX_VALUES:
            raise CaseFileError(f"{path}: more than {MAX_VALUES} values; a case file this large is refused")
        if depth > MAX_DEPTH:
            raise err(path, key, f"nested more than {MAX_DEPTH} levels deep; a case file needs at most 4")
        if isinstance(value, dict):
            stack.extend((f"{key}.{k}", v, depth + 1) for k, v in value.items())
        elif isinstance(value, list):
            first = 1 if key in ("expect", "limit") else 0  # entries count from 1, as messages name them
            stack.extend((f"{key}[{i}]", v, depth + 1) for i, v in enumerate(value, start=first))
        elif isinstance(value, str):
            check_string(path, key, value)


def check_string(path: Path, key: str, value: str) -> None:
    """Free text may hold line ends and tabs; other strings no control character; all within their length."""
    leaf = key.rsplit(".", 1)[-1].split("[", 1)[0]
    free = leaf in _FREE_TEXT
    limit = MAX_CASE_BYTES if leaf == "netlist" else MAX_TEXT_CHARS if free else MAX_STRING_CHARS
    if len(value) > limit:
        raise err(path, key, f"the text is {len(value)} characters long; at most {limit} are accepted here")
    allowed = "\t\n\r" if free else "\t"
    bad = next((ch for ch in value if (ord(ch) < 32 and ch not in allowed) or ord(ch) == 127), None)
    if bad is not None:
        raise err(path, key, f"contains the control character {bad!r}; remove it (case files hold plain text)")


def string(path: Path, data: dict[str, Any], key: str, default: str) -> str:
    """``data[key]`` as a string (numbers are not taken for text), or the default when absent."""
    value = data.get(key, default)
    if not isinstance(value, str):
        raise err(path, key, f"must be a string in quotes (got {type(value).__name__} {str(value)[:40]!r})")
    return value


def boolean(path: Path, data: dict[str, Any], key: str, default: bool) -> bool:
    value = data.get(key, default)
    if not isinstance(value, bool):
        raise err(path, key, f"must be true or false (got {str(value)[:40]!r})")
    return value


def table(path: Path, data: dict[str, Any], key: str, example: str) -> dict[str, Any]:
    value = data.get(key, {})
    if not isinstance(value, dict):
        raise err(path, key, f"must be a table like {example} (got {type(value).__name__})")
    return value


def entries(path: Path, data: dict[str, Any], key: str) -> list[dict[str, Any]]:
    """The ``[[key]]`` array of tables, at most ``MAX_ENTRIES`` of them, each a table."""
    value = data.get(key, [])
    if not isinstance(value, list):
        raise err(path, key, f"must be written as [[{key}]] tables (got {type(value).__name__})")
    if len(value) > MAX_ENTRIES:
        raise err(path, key, f"has {len(value)} entries; at most {MAX_ENTRIES} [[{key}]] tables per case file")
    for i, item in enumerate(value, start=1):
        if not isinstance(item, dict):
            raise err(path, f"{key}[{i}]", f"each [[{key}]] must be a table (got {type(item).__name__})")
    return value

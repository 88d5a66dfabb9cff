"""pytest plugin: crosscheck case files become tests, so a library of networks runs with the rest of a suite.

Installed with crosscheck (the ``pytest11`` entry point ``crosscheck``); disable it with
``-p no:crosscheck``. Collection is opt-in so that installing crosscheck never makes
pytest pick up TOML files by surprise. A ``*.toml`` file is collected when

* it looks like a case file (its top level has both ``netlist`` and ``port`` keys; a file
  that is not valid TOML but has both lines counts too, so a broken case fails loudly), and
* either it is, or lies under, a path named on the command line (``pytest corpus/``),
  or collection is switched on for every path: ``--crosscheck`` or ``crosscheck_cases = true``
  in the ini file (use that when ``testpaths`` lists the case folders and you run a bare ``pytest``).

One case file is one test item. Outcomes: ``pass`` passes; ``fail`` and ``drift`` fail with an
obtained/expected table; an invalid case file or netlist is an *error* at setup naming the file
and key (or line); a case an engine crashed on fails with the engine's words; ``unavailable``
(an engine could not produce a quantity) is *skipped with the reason*, which ``-ra`` lists in the
summary. A reading warning the case file does not acknowledge (``accept_warnings``) is a pytest warning
(``CrosscheckReadingWarning``) at the netlist's file and line, and the ``crosscheck reading`` report section
lists it with reading's notes; ``--crosscheck-strict`` makes it a failure, as ``verify --strict`` does.
A CI gate that must not let an unavailable case through should run ``crosscheck verify``
(exit code 4) or ``ci/crosscheck-gate.sh``, not rely on the skip.

Only stdlib and pytest are imported at module level: the plugin loads in every pytest run.
"""

from __future__ import annotations

import re
import tomllib
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from crosscheck.errors import CrosscheckError
from crosscheck.report.untrusted import terminal_text

_CASE_KEYS = ("netlist", "port")
_LOOKS_LIKE_KEY = {k: re.compile(rf"^\s*{k}\s*=", re.MULTILINE) for k in _CASE_KEYS}
_MAX_PEEK_BYTES = 1 << 20  # a case file is a few kB; never read a large data file just to reject it
_POOL_KEY = pytest.StashKey[Any]()


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("crosscheck", "crosscheck case files")
    group.addoption(
        "--crosscheck",
        action="store_true",
        default=False,
        dest="crosscheck_cases",
        help="collect crosscheck case files (*.toml with netlist and port keys) under every path, "
        "not only under paths named on the command line",
    )
    group.addoption(
        "--crosscheck-engine",
        choices=("both", "own"),
        default="both",
        help="both: compare with ngspice (default); own: crosscheck's solver only, for quick runs "
        "of expectations and limits",
    )
    group.addoption(
        "--crosscheck-timeout",
        type=float,
        default=60.0,
        metavar="SECONDS",
        help="seconds ngspice may take per case (default 60)",
    )
    group.addoption(
        "--crosscheck-strict",
        action="store_true",
        default=False,
        help="a reading warning the case file does not acknowledge (accept_warnings) fails the case, as "
        "crosscheck verify --strict does; without it each warning is a pytest warning",
    )
    parser.addini(
        "crosscheck_cases",
        type="bool",
        default=False,
        help="collect crosscheck case files under every path pytest searches (e.g. testpaths)",
    )


def looks_like_case(path: Path) -> bool:
    """True for a TOML file whose top level names both a netlist and a port (pyproject.toml never does)."""
    try:
        if path.stat().st_size > _MAX_PEEK_BYTES:
            return False
        raw = path.read_bytes()
    except OSError:
        return False
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, tomllib.TOMLDecodeError):
        text = raw.decode("utf-8", errors="replace")
        return all(pattern.search(text) for pattern in _LOOKS_LIKE_KEY.values())
    return all(key in data for key in _CASE_KEYS)


def _switched_on(config: pytest.Config) -> bool:
    return bool(config.getoption("crosscheck_cases") or config.getini("crosscheck_cases"))


def _named_on_command_line(config: pytest.Config, path: Path) -> bool:
    if config.args_source != pytest.Config.ArgsSource.ARGS:
        return False
    here = config.invocation_params.dir
    for arg in config.args:
        named = (here / arg.split("::")[0]).resolve()
        if path.resolve() == named or path.resolve().is_relative_to(named):
            return True
    return False


def pytest_collect_file(file_path: Path, parent: pytest.Collector) -> pytest.Collector | None:
    if file_path.suffix.lower() != ".toml":
        return None
    config = parent.config
    if not (_switched_on(config) or _named_on_command_line(config, file_path)):
        return None
    if not looks_like_case(file_path):
        return None
    return CaseFile.from_parent(parent, path=file_path)


class CaseFile(pytest.File):
    """A case file: one case, so one item. Reading it waits for the item's setup, so one bad file
    is one error and every other case still runs."""

    def collect(self) -> Iterator[pytest.Item]:
        yield CaseItem.from_parent(self, name=self.path.stem)


class CaseProblem(CrosscheckError, AssertionError):
    """A case ran and did not pass; carries the result so ``repr_failure`` can show the numbers."""

    def __init__(self, result: Any):
        super().__init__(result.verdict)
        self.result = result


class CaseItem(pytest.Item):
    """Runs one case through crosscheck's solver (and ngspice) and judges it as ``crosscheck verify`` does."""

    def __init__(self, **kwargs: Any):
        super().__init__(**kwargs)
        self.case: Any = None
        self.result: Any = None

    def setup(self) -> None:
        from crosscheck.model.cases import load_case  # start-up time: pytest loads this plugin in every session
        from crosscheck.run.check import load_network  # start-up time: pytest loads this plugin in every session

        problem = None
        try:
            self.case = load_case(self.path)
            load_network(self.case)
        except CrosscheckError as exc:
            problem = f"invalid case: {exc}"
        if problem is not None:  # raised outside the handler, so pytest shows one message, not a chain
            pytest.fail(problem, pytrace=False)

    def runtest(self) -> None:
        from crosscheck.report.frame import case_reason  # start-up time: pytest loads this plugin in every session
        from crosscheck.run.check import run_cases  # start-up time: pytest loads this plugin in every session

        engine = self.config.getoption("crosscheck_engine")
        pool = _pool(self.config) if engine == "both" else None
        [result] = run_cases([self.case], engine=engine, pool=pool)
        if self.config.getoption("crosscheck_strict"):
            from crosscheck.run.check import held_strictly  # start-up time: pytest loads this plugin in every session

            result = held_strictly(result)
        self.result = result
        _report_reading(self, result)
        self.user_properties.append(("crosscheck_verdict", result.verdict))
        if result.spice is not None:
            self.user_properties.append(("ngspice_version", result.spice.ngspice_version))
        if result.verdict == "pass":
            return
        if result.verdict == "unavailable":
            pytest.skip(f"crosscheck unavailable: {case_reason(result)}")
        raise CaseProblem(result)

    def repr_failure(self, excinfo: pytest.ExceptionInfo[BaseException], style: Any = None) -> Any:
        if isinstance(excinfo.value, CaseProblem):
            return failure_text(excinfo.value.result)
        return super().repr_failure(excinfo, style=style)

    def reportinfo(self) -> tuple[Path, int | None, str]:
        return self.path, None, f"crosscheck case {self.path.name}"


class CrosscheckReadingWarning(CrosscheckError, UserWarning):
    """A trap found reading a case's netlist (``model.reading.WARNING_CODES``); silenced by the case file's
    ``accept_warnings``, made a failure by ``--crosscheck-strict`` (or by ``-W error``, as any warning)."""


def _report_reading(item: CaseItem, result: Any) -> None:
    """Each unacknowledged warning as a pytest warning at the netlist's file and line, and a report section
    (shown with a failure, or with ``-rA``) holding the warnings and reading's notes. Text is user text:
    shown through ``terminal_text``."""
    from crosscheck.report.read_warnings import (  # start-up time: pytest loads this plugin in every session
        note_lines,
        warning_lines,
    )

    for w in result.open_warnings:
        warnings.warn_explicit(
            CrosscheckReadingWarning(terminal_text(f"crosscheck [{w.code}]: {w.message}")),
            CrosscheckReadingWarning,
            filename=terminal_text(w.location.file),
            lineno=w.location.line or 0,
        )
    lines = warning_lines(result) + note_lines(result)
    if lines:
        item.add_report_section("call", "crosscheck reading", terminal_text("\n".join(lines)))


def failure_text(result: Any, rows: int = 8) -> str:
    """A few lines a reviewer can act on: the verdict, the obtained/expected table, and why."""
    from crosscheck.report.frame import (  # start-up time: pytest loads this plugin in every session
        case_reason,
        finding_table,
        findings,
    )
    from crosscheck.report.read_warnings import warning_lines  # start-up time: see above

    found = findings(result)
    lines = [f"crosscheck: {result.verdict} — {result.title} (port {result.port[0]} → {result.port[1]})"]
    lines += ["  " + line for line in warning_lines(result)]
    table = finding_table(found, limit=rows)
    lines += ["  " + line for line in table]
    reason = case_reason(result)
    lines.append(f"why: {reason}")
    said = [reason]
    for f in found[:rows]:  # other distinct explanations, up to three lines in all
        if len(said) >= 3:
            break
        if f.why and f.check != "input" and not any(f.why in s for s in said):
            said.append(f.why)
            lines.append(f"     {f.label}: {f.why}")
    return terminal_text("\n".join(lines))  # case text is untrusted: no terminal control sequences


def _pool(config: pytest.Config) -> Any:
    """One ngspice worker for the whole session, started on first use (items run one at a time)."""
    pool = config.stash.get(_POOL_KEY, None)
    if pool is None:
        from crosscheck.spice.workers import SpicePool  # start-up time: pytest loads this plugin in every session

        pool = SpicePool(workers=1, timeout_s=config.getoption("crosscheck_timeout"))
        pool.__enter__()
        config.stash[_POOL_KEY] = pool
    return pool


def pytest_unconfigure(config: pytest.Config) -> None:
    pool = config.stash.get(_POOL_KEY, None)
    if pool is not None:
        pool.close()
        del config.stash[_POOL_KEY]

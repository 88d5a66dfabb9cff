"""CSV of checked cases: the verdict frame written by pandas, for spreadsheets and ``pandas.read_csv``.

One row per case, check, frequency and quantity (columns in ``frame.COLUMNS``; the
``check`` column says which comparison a row is: see ``frame.CHECKS``). Complex values
are split into ``*_re`` and ``*_im`` columns, written as the shortest text that reads back
to the same double, so a round trip through ``read_csv`` loses nothing. Empty cells mean "not applicable to this row".
The last row (``check`` = ``caution``) carries the caution every report ends with, in a
row rather than a trailing comment, so the file stays one valid table. A case's own cautions
(``report.caution``) come first, right under the header, in rows of the same kind with the case named:
``quantity`` = ``hazard`` for crosscheck's judgement of its levels, ``case file`` for its file's ``caution``.
Reading's unacknowledged warnings follow them (``check`` = ``warning``, ``quantity`` = the code, ``explanation``
= ``file:line: message``); its notes come last before the caution row (``check`` = ``note``).
Every string cell goes through ``untrusted.csv_text``: one a spreadsheet would read as a
formula (it starts with ``= + - @``, tab or CR) gets a leading ``'``, the rule of OWASP's
CSV Injection guidance; number columns are left as numbers.
"""

from __future__ import annotations

from collections.abc import Sequence

import pandas as pd

from crosscheck.judge.result import CaseResult
from crosscheck.report.caution import CAUTION, case_cautions
from crosscheck.report.frame import COLUMNS, verdict_frame
from crosscheck.report.untrusted import csv_text


def reading_rows(results: Sequence[CaseResult], notes: bool) -> list[dict[str, str]]:
    """Rows for reading's warnings (``check`` = ``warning``, ``quantity`` = its code, ``explanation`` =
    ``file:line: message``; unacknowledged only) or, with ``notes``, its notes (``check`` = ``note``)."""
    out: list[dict[str, str]] = []
    for r in results:
        head = {"case": r.name, "title": r.title, "port": ",".join(r.port)}
        if notes:
            out += [head | {"check": "note", "explanation": n} for n in r.read_notes]
        else:
            out += [
                head | {"check": "warning", "quantity": w.code, "explanation": f"{w.location}: {w.message}"}
                for w in r.open_warnings
            ]
    return out


def csv_report(results: Sequence[CaseResult]) -> str:
    """The CSV text (header line first, ``\\n`` line ends)."""
    frame = verdict_frame(results)
    own = [
        {
            "case": c.name,
            "title": c.title,
            "port": ",".join(results[c.index - 1].port),
            "check": "caution",
            "quantity": quantity,
            "explanation": text,
        }
        for c in case_cautions(results)
        for quantity, text in (("hazard", c.hazard), ("case file", c.stated))
        if text
    ]
    own += reading_rows(results, notes=False)
    notes = reading_rows(results, notes=True)
    rows = [pd.DataFrame(own, columns=COLUMNS)] if own else []
    rows += [frame] if len(frame) else []
    rows += [pd.DataFrame(notes, columns=COLUMNS)] if notes else []
    rows.append(pd.DataFrame([{"check": "caution", "explanation": CAUTION}], columns=COLUMNS))
    frame = pd.concat(rows, ignore_index=True)
    for column in frame.columns:
        if not pd.api.types.is_numeric_dtype(frame[column]):  # text columns only: a negative number is no formula
            frame[column] = frame[column].map(csv_text)
    return frame.to_csv(index=False, lineterminator="\n")

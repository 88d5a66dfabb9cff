"""CSV of checked cases: the verdict frame written by pandas, for spreadsheets and ``pandas.read_csv``.

One row per case, check, frequency and quantity (columns in ``frame.COLUMNS``; the
``check`` column says which comparison a row is: see ``frame.CHECKS``). Complex values
are split into ``*_re`` and ``*_im`` columns, written as the shortest text that reads back
to the same double, so a round trip through ``read_csv`` loses nothing. Empty cells mean "not applicable to this row".
The last row (``check`` = ``caution``) carries the caution every report ends with, in a
row rather than a trailing comment, so the file stays one valid table.
Every string cell goes through ``untrusted.csv_text``: one a spreadsheet would read as a
formula (it starts with ``= + - @``, tab or CR) gets a leading ``'``, the rule of OWASP's
CSV Injection guidance; number columns are left as numbers.
"""

from __future__ import annotations

from collections.abc import Sequence

import pandas as pd

from crosscheck.judge.result import CaseResult
from crosscheck.report.caution import CAUTION
from crosscheck.report.frame import COLUMNS, verdict_frame
from crosscheck.report.untrusted import csv_text


def csv_report(results: Sequence[CaseResult]) -> str:
    """The CSV text (header line first, ``\\n`` line ends)."""
    frame = verdict_frame(results)
    caution = pd.DataFrame([{"check": "caution", "explanation": CAUTION}], columns=COLUMNS)
    frame = pd.concat([frame, caution], ignore_index=True) if len(frame) else caution
    for column in frame.columns:
        if not pd.api.types.is_numeric_dtype(frame[column]):  # text columns only: a negative number is no formula
            frame[column] = frame[column].map(csv_text)
    return frame.to_csv(index=False, lineterminator="\n")

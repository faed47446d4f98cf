"""The column separator of a delimited text table (CSV and its relatives), judged from its header line.

One rule for every table ppp reads: batch input libraries, the reference tables of ``ppp fit``, measured
spectra. Spreadsheet programs write ";" where the decimal separator is a comma; tab and "|" are other
common exports.
"""
from __future__ import annotations

#: Column separators recognised, in order of preference on a tie.
DELIMITERS = (",", ";", "\t", "|")


def header_delimiter(header_line: str, default: str | None = ",") -> str | None:
    """The one of :data:`DELIMITERS` that occurs most often outside double quotes in ``header_line``;
    ``default`` when none occurs (a one-column table; None lets the caller split on white space). Only
    the header is looked at: column names never hold SMILES or numbers, whose characters could mislead a
    count over the rows."""
    outside, quoted = [], False
    for ch in header_line:
        if ch == '"':
            quoted = not quoted
        elif not quoted:
            outside.append(ch)
    text = "".join(outside)
    counts = [text.count(d) for d in DELIMITERS]
    best = max(range(len(DELIMITERS)), key=lambda i: (counts[i], -i))
    return DELIMITERS[best] if counts[best] else default

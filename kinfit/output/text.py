"""Building blocks of the text summaries and CSV files: tables, wrapped notes, temperatures.

The ``format_*`` functions of the other output modules build their text from
these, so that every summary aligns its tables, wraps its warnings and words
its cautions the same way, and every CSV file is written by the csv module
(fields quoted where they need it).
"""

from __future__ import annotations

import csv
import io
import textwrap

from kinfit.core.formatting import CAUTIONS

__all__ = ["text_table", "closing_lines", "wrapped", "csv_text", "kelvin_celsius", "celsius",
           "interval_text", "WIDTH"]

WIDTH = 88


def text_table(rows, header):
    """Lines of a left-aligned table, indented by two spaces, header first.

    Parameters
    ----------
    rows : sequence of sequence
        Cells; each is shown with ``str``.
    header : sequence of str

    Returns
    -------
    list of str
    """
    widths = [max(len(str(r[i])) for r in [header] + list(rows)) for i in range(len(header))]
    lines = ["  " + "  ".join(str(h).ljust(w) for h, w in zip(header, widths)).rstrip()]
    for r in rows:
        lines.append("  " + "  ".join(str(c).ljust(w) for c, w in zip(r, widths)).rstrip())
    return lines


def wrapped(text, first="  - ", rest="    "):
    """`text` wrapped to :data:`WIDTH` columns, without breaking at hyphens."""
    return textwrap.wrap(text, WIDTH, initial_indent=first, subsequent_indent=rest,
                         break_on_hyphens=False)


def closing_lines(warnings, cautions, caution_text=CAUTIONS):
    """The closing lines of a summary: its warnings and (optionally) the cautions."""
    out = []
    if warnings:
        out += ["", "Warnings"]
        for w in warnings:
            out += wrapped(w)
    if cautions:
        out += ["", "Caution"] + wrapped(caution_text, "  ", "  ")
    return out


def csv_text(header, rows):
    """A CSV table as text: comma-separated, ``\\n`` line ends, quoted where needed.

    Parameters
    ----------
    header : sequence of str
    rows : iterable of sequence of str
        Cells already formatted as text (numbers with the precision wanted).

    Returns
    -------
    str
    """
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buffer.getvalue()


def celsius(kelvin):
    """Degrees Celsius from kelvin (scipy.constants.convert_temperature)."""
    from scipy.constants import convert_temperature

    return float(convert_temperature(kelvin, "K", "C"))


def kelvin_celsius(kelvin):
    """``'303.15 K (30.0 °C)'``."""
    return f"{kelvin:.2f} K ({celsius(kelvin):.1f} °C)"


def interval_text(pair, digits=4):
    """``'1.2 – 3.4'``, or ``'—'`` without an interval."""
    if pair is None:
        return "—"
    return f"{pair[0]:.{digits}g} – {pair[1]:.{digits}g}"

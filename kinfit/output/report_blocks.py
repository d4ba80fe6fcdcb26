"""Building blocks of ``report.html``: text, tables, figures, rate laws written out.

:mod:`kinfit.output.html` assembles the page's sections from these. Every
block is a plain dict the template renders (``kind`` text, law, heading,
warning, caution, table or figure). Units arrive as plain text from the JSON
files and leave with superscripts (:func:`unit_html`); a table drops the
interval columns of analyses that were not run (:func:`without_empty_columns`).
"""

from __future__ import annotations

import base64
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

from kinfit.core.formatting import format_interval, format_value, superscripts

__all__ = ["Page", "figure_block", "number", "interval_cell", "unit_html", "text_block",
           "table_block", "without_empty_columns", "written_rate_law", "law_blocks",
           "winner_blocks", "nested_blocks", "average_blocks"]


@dataclass
class Page:
    """What the sections are built from: the folder, where the fit's figures are (the
    folder, or ``best/`` of a ranking), the JSON data, and the warnings already shown."""

    folder: Path
    figures: Path
    data: dict
    shown: set = field(default_factory=set)

    def warning(self, text):
        """A warning block, or None if the page already shows this text."""
        if text in self.shown:
            return None
        self.shown.add(text)
        return text_block("warning", text)


def figure_block(folder, stem, caption, alt=None):
    """A figure block from stem.svg (or stem.png), or None if neither exists."""
    for suffix, mime in ((".svg", "image/svg+xml"), (".png", "image/png")):
        path = folder / f"{stem}{suffix}"
        if path.is_file():
            data = base64.b64encode(path.read_bytes()).decode("ascii")
            return {"kind": "figure", "src": f"data:{mime};base64,{data}", "caption": caption,
                    "alt": alt or caption}
    return None


def number(x, digits=4):
    """A number for a table cell: `digits` significant digits, integers whole, "–" if none."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "–"
    if isinstance(x, (int,)) and not isinstance(x, bool):
        return str(x)
    return f"{x:.{digits}g}"


def interval_cell(pair, stderr=None):
    """An interval's ends at the precision of its estimate's standard error; "–" without
    an interval, "open" for an end that does not exist (a profile that does not close)."""
    if not pair or (pair[0] is None and pair[1] is None):
        return "–"
    if pair[0] is None or pair[1] is None:
        ends = ["open" if v is None else format_interval((v, v), stderr).split(" – ")[0]
                for v in pair]
        return f"{ends[0]} – {ends[1]}"
    return format_interval(pair, stderr)


def unit_html(text):
    """A unit with superscripts (``mM^-1 s^-1`` -> ``mM⁻¹ s⁻¹``); ``""`` for none."""
    return superscripts(text or "")


def text_block(kind, text, **extra):
    """A block of `kind` (text, law, heading, warning or caution) holding `text`."""
    return {"kind": kind, "text": text, **extra}


def table_block(header, rows, numeric=True):
    """A table; with `numeric`, every column after the first is right-aligned.

    A cell "value ± error" is kept on one line (no-break spaces around ±), so that
    a narrow page wraps it only between the ends of an interval.
    """
    rows = [[c.replace(" ± ", "\u00a0±\u00a0") if isinstance(c, str) else c for c in row]
            for row in rows]
    return {"kind": "table", "header": header, "rows": rows, "numeric": numeric}


def without_empty_columns(header, rows, optional):
    """`header` and `rows` without the columns named in `optional` that hold no value
    (analyses not run: every cell "–")."""
    keep = [i for i, h in enumerate(header)
            if h not in optional or any(r[i] not in ("–", "—", "", None) for r in rows)]
    return [header[i] for i in keep], [[r[i] for i in keep] for r in rows]


_ORDER = re.compile(r"\[([^\]]+)\](?:\^(\([^)]*\)|[^\s\[]+))?")


def written_rate_law(law, parameters, digits=3):
    """A rate law written out with its orders: ``k [X] [Y]²``, ``k [A]^0.497`` -> superscripts.

    Orders fixed in the model (or by a ranking) are shown as given (an order
    of 1 is not written); fitted ones with `digits` decimals, so that a fitted
    1.004 never reads as a fixed 1.

    Parameters
    ----------
    law : dict
        An entry of ``rate_laws`` in ``result.json``: ``rate`` (orders as
        numbers) and ``rate_law`` (orders by name).
    parameters : dict
        ``parameters`` of ``result.json`` (``value``, ``vary`` of each).

    Returns
    -------
    str
        With superscript exponents (for HTML).
    """
    numeric = law.get("rate") or ""
    symbolic = law.get("rate_law")
    if not symbolic:
        return superscripts(numeric)
    shown = [exponent for _, exponent in _ORDER.findall(numeric)]
    count = iter(range(len(shown) + len(symbolic)))

    def order(match):
        species, name = match.group(1), match.group(2)
        i = next(count)
        exponent = shown[i] if i < len(shown) else name      # as the fit printed it
        entry = parameters.get(name or "")
        if name is None or re.fullmatch(r"-?[\d.]+", name):
            exponent = name                                   # a number in the model
        elif entry is not None and not entry.get("vary", True):
            exponent = f"{entry['value']:g}"                  # fixed: as given
        elif entry is not None:
            exponent = f"{entry['value']:.{digits}f}"         # fitted
        return f"[{species}]" if exponent in (None, "1") else f"[{species}]^{exponent}"

    return superscripts(_ORDER.sub(order, symbolic))


def constant_text(name, p):
    """``k = 1.502e-04 ± 9.6e-07 mM⁻¹·⁵ min⁻¹ (95 % interval 1.483e-04 – 1.521e-04)``."""
    text = f"{name} = {format_value(p.get('value'), p.get('stderr'))} {unit_html(p.get('unit'))}"
    if p.get("ci95"):
        text += f" (95 % interval {format_interval(p['ci95'], p.get('stderr'))})"
    return text.replace("  ", " ").strip()


def law_blocks(result):
    """Each rate law written out, with its rate constant ± standard error, interval, unit."""
    params = result.get("parameters", {})
    blocks = []
    for law in result.get("rate_laws", []):
        direction = " (reverse)" if law.get("direction") == "reverse" else ""
        constant = law.get("rate_constant")
        note = f"overall order {law['overall_order']:.3g}"
        if constant in params:
            note = constant_text(constant, params[constant]) + "; " + note
        blocks.append(text_block("law", f"{law['reaction']}{direction}:  rate = "
                                   f"{written_rate_law(law, params)}", note=note))
    return blocks


def winner_blocks(ranking):
    """The best-supported candidate's rate law written out, its rate constants and
    parameter table, from ``ranking.json``."""
    candidates = ranking.get("candidates") or []
    if not candidates or not candidates[0].get("rate_laws"):
        return []
    best = candidates[0]
    params = best.get("parameters", {})
    blocks = [text_block("heading", f"Best supported: {best['name']} (Akaike weight "
                               f"{number(best.get('akaike_weight'), 3)})")]
    blocks += law_blocks(best)
    rows = [[name, format_value(p.get("value"), p.get("stderr")),
             format_interval(p.get("ci95"), p.get("stderr")), unit_html(p.get("unit")),
             p.get("role") or "", "" if p.get("vary", True) else "fixed"]
            for name, p in params.items()]
    blocks.append(table_block(*without_empty_columns(["parameter", "value ± standard error",
                                    "95 % interval (covariance)", "unit", "role", "note"],
                                   rows, {"95 % interval (covariance)", "note"})))
    return blocks


def nested_blocks(ranking, shown_at_most=8):
    """Nested pairs that say whether a simpler candidate will do (as the terminal shows
    them: a leading candidate against what contains it, and what the best contains)."""
    names = [c["name"] for c in ranking.get("candidates", [])]
    tests = ranking.get("nested_tests") or []
    if not names or not tests:
        return []
    leading = set(names[:3])
    shown = [t for t in tests if t.get("smaller") in leading or t.get("larger") == names[0]]
    if not shown:
        return []
    rows = [[t["smaller"], t["larger"], t.get("extra_params"), number(t.get("f_statistic")),
             _p_value(t.get("f_pvalue")), number(t.get("lr_statistic")),
             _p_value(t.get("lr_pvalue")), "yes" if t.get("on_boundary") else ""]
            for t in shown[:shown_at_most]]
    header, rows = without_empty_columns(["smaller", "larger", "extra parameters", "F", "p (F)", "LR",
                             "p (LR)", "on a bound"], rows, {"on a bound"})
    blocks = [text_block("heading", "Nested pairs: F-test and likelihood ratio"),
              text_block("text", "The smaller candidate is the larger one with parameters fixed; a "
                            "small p says the extra parameters are needed.")
              , table_block(header, rows)]
    if len(shown) > shown_at_most:
        blocks.append(text_block("text", f"{len(shown) - shown_at_most} more in ranking.json."))
    if any(t.get("on_boundary") for t in shown[:shown_at_most]):
        blocks.append(text_block("text", "On a bound: the smaller model fixes a value on a bound "
                                    "of the larger one, so the p-values are conservative "
                                    "(too large)."))
    return blocks


def average_blocks(ranking):
    """Model-averaged parameters (Akaike weights, unconditional standard error)."""
    averages = ranking.get("model_averages") or []
    if not averages:
        return []
    rows = [[a["name"], format_value(a.get("value"), a.get("stderr")), unit_html(a.get("unit")),
             number(a.get("weight"), 3), a.get("n_candidates"), a.get("note") or ""]
            for a in averages]
    return [text_block("heading", "Model-averaged parameters"),
            text_block("text", "Averaged with Akaike weights; unconditional standard error "
                          "(Burnham & Anderson 2002, chapter 4)."),
            table_block(*without_empty_columns(["parameter", "value ± standard error", "unit", "weight covered",
                              "candidates", "note"], rows, {"note"}))]


def _p_value(p):
    """A p-value; one that underflows to 0 is shown as below the smallest double."""
    return "< 1e-300" if p == 0 else number(p, 3)

"""Reports: results into text for people — tables, sentences, JSON and HTML documents.

This package is one of the edges where units are formatted (with
:mod:`sensormodel.quantities`); it computes nothing of its own. Results carry reason codes and
numbers; :func:`reason_text` is the one place they become sentences.

Modules: ``_units`` (display units of parameters and channels, durations), ``_reasons`` (the
reason-code table), ``_text`` (terminal tables of models, Allan curves, identifications, drift
and command summaries), ``_verdict`` (the verdict document, its JSON and terminal text, the
recording plan), ``_html`` (the self-contained HTML report and its figures).
"""

from ._html import check_verdict_html, verdict_figures, verdict_html, write_verdict_html
from ._reasons import REASONS, reason_text, term_note
from ._text import (
    TermRow,
    allan_heading,
    allan_table,
    drift_table,
    export_summary,
    identify_heading,
    identify_notes,
    identify_rows,
    identify_table,
    inspect_text,
    realization_lines,
    shape_summary,
    simulate_summary,
    term_rows,
)
from ._units import (
    DRIFT_DISPLAY,
    channel_display,
    counted,
    display_values,
    format_duration,
    model_display,
)
from ._verdict import (
    SAFETY_CAUTION,
    VERDICT_SCHEMA_FILE,
    VERDICT_SCHEMA_ID,
    plan_text,
    verdict_document,
    verdict_text,
    write_verdict_json,
)

__all__ = [
    "DRIFT_DISPLAY",
    "REASONS",
    "SAFETY_CAUTION",
    "TermRow",
    "VERDICT_SCHEMA_FILE",
    "VERDICT_SCHEMA_ID",
    "allan_heading",
    "allan_table",
    "channel_display",
    "counted",
    "display_values",
    "drift_table",
    "export_summary",
    "format_duration",
    "identify_heading",
    "identify_notes",
    "identify_rows",
    "identify_table",
    "inspect_text",
    "model_display",
    "plan_text",
    "realization_lines",
    "reason_text",
    "shape_summary",
    "simulate_summary",
    "term_note",
    "term_rows",
    "verdict_document",
    "verdict_figures",
    "verdict_html",
    "verdict_text",
    "write_verdict_html",
    "check_verdict_html",
    "write_verdict_json",
]

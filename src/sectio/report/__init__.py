"""Writers (JSON, CSV, PNG), overlays, figures and the HTML/PDF report.

Everything is rendered from ``to_dict()`` documents; nothing here measures.
"""

from ._io import (
    CSV_DIALECTS,
    atomic_write_bytes,
    atomic_write_text,
    jsonable,
    png_bytes,
    round_significant,
    to_json_text,
    write_csv,
    write_json,
)

__all__ = [
    "CSV_DIALECTS",
    "atomic_write_bytes",
    "atomic_write_text",
    "jsonable",
    "png_bytes",
    "round_significant",
    "to_json_text",
    "write_csv",
    "write_json",
]

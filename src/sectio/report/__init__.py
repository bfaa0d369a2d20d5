"""Writers (JSON, CSV), overlays, figures and the HTML/PDF report; all render from to_dict()."""

from ._io import atomic_write_bytes, atomic_write_text, write_csv, write_json

__all__ = ["atomic_write_bytes", "atomic_write_text", "write_csv", "write_json"]

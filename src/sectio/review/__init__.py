"""Review and correct a field by hand: edits on label maps, edit files, the review page.

Public names: :func:`apply_edits` (pure edit application on label maps),
:func:`with_edits` (a measured field re-measured after its edits), the edit-file helpers
and :func:`apply_edit_file` (what every run calls).
"""

from .apply import EditedLabels, EditError, apply_edits
from .editfile import (
    EditFileError,
    edit_file_name,
    image_sha256,
    new_edit_doc,
    read_edit_file,
    write_edit_file,
)
from .measure import EditedField, measure_field, with_edits
from .runs import apply_edit_file

__all__ = [
    "EditError", "EditFileError", "EditedField", "EditedLabels", "apply_edit_file",
    "apply_edits", "edit_file_name", "image_sha256", "measure_field", "new_edit_doc",
    "read_edit_file", "with_edits", "write_edit_file",
]

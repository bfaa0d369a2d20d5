"""Measure one field with its hand edits: the segmentation's labels, edited, re-measured.

The segmentation is never re-run for an edit: :func:`with_edits` takes the labels of a
measured field, applies the edit list (:mod:`sectio.review.apply`) and measures the edited
map with the same stereology as the automatic result. This is what ``sectio grains``,
``sectio particles``, ``sectio study`` and the review page all call, so the numbers agree.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .apply import EditedLabels, apply_edits
from .editfile import edits_entry


@dataclass(frozen=True)
class EditedField:
    """A measured field (GrainField or ParticleField) and what the edits did to it."""

    field: Any  # GrainField or ParticleField
    edited: EditedLabels | None
    edit_doc: dict | None

    def to_dict(self, **kwargs) -> dict:
        d = self.field.to_dict(**kwargs)
        add_edit_keys(d, self.edited, self.edit_doc)
        return d


def add_edit_keys(d: dict, edited: EditedLabels | None, doc: dict | None,
                  file_name: str | None = None) -> dict:
    """The ``edits`` entry of a field's JSON and the numbers of its left-out area/twins."""
    d["edits"] = edits_entry(doc, file_name)
    if edited is not None:
        d["left_out_fraction"] = float(edited.left_out.mean())
        if edited.twin_pairs:
            d["twin_boundaries_marked"] = len(edited.twin_pairs)
            d["twin_boundary_length_marked_um"] = (edited.twin_length_px
                                                   * d.get("pixel_size_um", float("nan")))
    return d


def measure_field(kind: str, micrograph, options: dict):
    """Segment and measure one field: ``options`` are the keyword arguments of
    :func:`sectio.grains.make_options` (grains) or :func:`sectio.measure_particles`."""
    if kind == "grains":
        from ..grains import make_options, measure_grains

        opts = dict(options)
        if "angles_deg" in opts:
            opts["angles_deg"] = tuple(opts["angles_deg"])
        return measure_grains(micrograph, make_options(**opts))
    from ..particles import measure_particles

    return measure_particles(micrograph, **options)


def base_labels(kind: str, field) -> np.ndarray:
    """The automatic label map of a measured field (the map edits are drawn on)."""
    return field.segmentation.labels


def with_edits(kind: str, field, edit_doc: dict | None, *, base: np.ndarray | None = None
               ) -> EditedField:
    """The field measured again after the edits of ``edit_doc`` (None: unchanged).

    ``base`` is the automatic label map (default: the field's own segmentation labels).
    """
    if edit_doc is None or not edit_doc.get("edits"):
        if edit_doc is None:
            return EditedField(field, None, None)
        lab = base_labels(kind, field) if base is None else base
        return EditedField(field, EditedLabels(lab, np.zeros(lab.shape, bool)), edit_doc)
    lab = base_labels(kind, field) if base is None else base
    edited = apply_edits(lab, edit_doc["edits"], kind=kind)
    return EditedField(remeasure(kind, field, edited), edited, edit_doc)


def remeasure(kind: str, field, edited: EditedLabels):
    """Measure an edited label map with the options of ``field``."""
    if kind == "grains":
        from ..grains import grain_field_from_labels

        return grain_field_from_labels(field.micrograph, edited.labels.astype(np.int32),
                                       field.options, field.segmentation)
    from ..particles import particle_field_from_segmentation
    from ..segment import split_lines

    labels = edited.labels.astype(np.int32)
    seg = replace(field.segmentation, labels=labels, mask=labels > 0,
                  split_lines=split_lines(labels))
    o = field.options
    return particle_field_from_segmentation(
        field.micrograph, seg, phase=o.get("phase", "bright"), floor_um=o["min_size_um"],
        points_per_side=o["points_per_side"], n_classes=o["n_classes"],
        foil_thickness_um=o["foil_thickness_um"], seed=o["seed"], left_out=edited.left_out)

"""Stereology: pure functions of label maps, masks and numbers (no file or terminal I/O)."""

from ._fieldstats import (
    FieldStats,
    field_statistics,
    split_unit,
    stat_key,
    stats_to_dict,
    t_critical,
)

__all__ = [
    "FieldStats",
    "field_statistics",
    "split_unit",
    "stat_key",
    "stats_to_dict",
    "t_critical",
]

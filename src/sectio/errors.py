"""Errors and warnings a user can cause.

Every error a user can cause is an :class:`InputError` (and the matching builtin), with a
message of one sentence that names the file or option and says what to do. The command
line prints the message without a traceback and exits with status 2.
"""

from __future__ import annotations


class InputError(Exception):
    """Base class of errors caused by the user's input (files, options, data)."""


class ImageReadError(InputError, OSError):
    """An image file cannot be read, or holds something that is not a micrograph."""


class CalibrationError(InputError, ValueError):
    """The pixel size is missing, malformed or cannot be trusted."""


class OptionError(InputError, ValueError):
    """An option value is out of range or malformed."""


class MeasurementError(InputError, ValueError):
    """The image was read but nothing measurable was found in it (e.g. no grains)."""


class StudyFileError(InputError, ValueError):
    """A study file is malformed; the message names the line and key."""


class ResultFileError(InputError, ValueError):
    """A grains/particles JSON or a data CSV cannot be used; the message names the file."""


class SectioWarning(UserWarning):
    """Base class of sectio's warnings."""


class DegenerateDataWarning(SectioWarning):
    """Too little data for a trustworthy statistic (e.g. one field, few grains)."""


class ImageWarning(SectioWarning):
    """Something about an image deserves a look (multi-page TIFF, RGB converted, ...)."""


class ExtrapolationWarning(SectioWarning):
    """A model is used outside the range its constants were fitted on."""


class CalibrationWarning(SectioWarning):
    """Pixel sizes from different sources disagree, or a calibration deserves a look."""

"""Output safety: safe file names from any bytes, writer failures as one sentence, plain text.

* :func:`safe_stem` turns whatever a file system allows in a name (non-UTF-8 bytes,
  spaces, quotes, markup, 250 characters) into a short portable stem; a name that had to
  change carries 8 hex digits of its original bytes, so two names never collide.
* :class:`OutputError` is what a failed write becomes: one sentence naming the folder and
  the cause (disk full, read-only, permission denied, name too long, ...); the CLI exits 2.
* :func:`prepare_out_dir` creates the output folder and proves it writable before any work.
* :func:`plain_text_figures` keeps user-typed text out of matplotlib's math parser.
* :func:`display_text` makes a string safe to encode as UTF-8 (undecodable bytes of a file
  name become U+FFFD) for JSON, CSV and HTML.
"""

from __future__ import annotations

import errno
import functools
import hashlib
import os
import re
from pathlib import Path

from ..errors import InputError

__all__ = ["OutputError", "display_text", "output_error", "plain_text_figures",
           "prepare_out_dir", "safe_stem", "unexpected_failure"]

_UNSAFE = re.compile(r"[^A-Za-z0-9._+\-]+")
MAX_STEM = 80


class OutputError(InputError, OSError):
    """An output file or folder cannot be written (disk full, read-only, permission)."""


_CAUSES = {
    errno.ENOSPC: "the disk is full",
    errno.EDQUOT: "the disk quota is exhausted",
    errno.EROFS: "the file system is read-only",
    errno.EACCES: "permission denied",
    errno.EPERM: "the operation is not permitted",
    errno.ENAMETOOLONG: "a file name is too long",
    errno.ENOTDIR: "a part of the path is a file, not a folder",
    errno.EEXIST: "a file of that name is in the way",
    errno.EISDIR: "a folder of that name is in the way",
    errno.EIO: "an input/output error of the device",
}


def output_error(path: str | os.PathLike, exc: OSError) -> OutputError:
    """The one-sentence error of a failed write to ``path``."""
    p = Path(path)
    cause = _CAUSES.get(exc.errno or 0) or (exc.strerror or type(exc).__name__).lower()
    folder = display_text(str(p.parent)) or "."
    return OutputError(
        f"Cannot write {display_text(p.name)} in {folder}: {cause}; free space, fix the "
        "permissions or choose another --out, then run the command again (finished fields "
        "of a study are kept and reused)."
    )


def prepare_out_dir(out: str | os.PathLike) -> Path:
    """Create ``out`` and check that files can be written in it (before any work is done)."""
    out = Path(out)
    try:
        out.mkdir(parents=True, exist_ok=True)
        if not out.is_dir():
            raise NotADirectoryError(errno.ENOTDIR, "not a folder", str(out))
        probe = out / f".sectio-probe-{os.getpid()}.tmp"
        with open(probe, "wb") as fh:
            fh.write(b"\0")
        probe.unlink()
    except OSError as exc:
        cause = _CAUSES.get(exc.errno or 0) or (exc.strerror or type(exc).__name__).lower()
        raise OutputError(f"Cannot write in the output folder {display_text(str(out))}: "
                          f"{cause}; choose another --out or fix the folder.") from None
    return out


def display_text(text: str) -> str:
    """``text`` with undecodable file-name bytes (lone surrogates) replaced by U+FFFD."""
    try:
        text.encode("utf-8")
        return text
    except UnicodeEncodeError:
        return text.encode("utf-8", "surrogateescape").decode("utf-8", "replace") \
            if _only_escapes(text) else text.encode("utf-8", "replace").decode("utf-8")


def _only_escapes(text: str) -> bool:
    try:
        text.encode("utf-8", "surrogateescape")
        return True
    except UnicodeEncodeError:
        return False


def safe_stem(name: str | bytes | os.PathLike, *, default: str = "field") -> str:
    """A portable file-name stem for ``name`` (its last component, suffix dropped).

    Letters, digits and ``. _ + -`` are kept, every other run becomes ``_``; a stem that had
    to change or was longer than 80 characters ends in ``-`` and 8 hex digits of the
    original name's bytes, so distinct inputs give distinct stems.
    """
    raw = os.fsencode(name) if not isinstance(name, bytes) else name
    base = raw.replace(b"\\", b"/").rsplit(b"/", 1)[-1]
    stem_b = base.rsplit(b".", 1)[0] if b"." in base.lstrip(b".") else base
    text = os.fsdecode(stem_b)
    clean = _UNSAFE.sub("_", text).strip("._") or default
    if clean == text and len(clean) <= MAX_STEM:
        return clean
    tag = hashlib.sha1(base).hexdigest()[:8]
    return f"{clean[:MAX_STEM]}-{tag}"


def plain_text_figures(func):
    """Run ``func`` with matplotlib's mathtext off: a ``$`` in a title stays a dollar sign."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        import matplotlib

        with matplotlib.rc_context({"text.parse_math": False}):
            return func(*args, **kwargs)

    return wrapper


def unexpected_failure(path, exc: BaseException) -> str:
    """The sentence recorded for a field that failed for a reason sectio did not foresee."""
    import os

    name = display_text(os.fspath(path))
    if isinstance(exc, MemoryError):
        return (f"{name} could not be measured: out of memory; measure it alone, crop it, or "
                "lower --max-image-memory so that it is refused early.")
    detail = display_text(str(exc))[:200]
    return (f"{name} could not be measured ({type(exc).__name__}: {detail}); the other "
            "fields are kept — please report this image as a fault in sectio.")

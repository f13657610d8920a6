"""Atomic file writes.

Every output file is first written to a temporary file in the destination folder and then
moved into place with :func:`os.replace` (atomic on POSIX and Windows when source and target
are on the same file system). An interrupted run therefore leaves either the previous file or
the complete new one under the final name, never a half-written file; at worst a stray
temporary ``.<stem>.<random>.tmp<suffix>`` remains.
"""

from __future__ import annotations

import contextlib
import os
import re
import tempfile
from collections.abc import Iterator
from pathlib import Path


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike) -> Iterator[Path]:
    """Context manager yielding a temporary path to write instead of ``path``.

    On normal exit the temporary file is flushed to disk and renamed to ``path``; on an
    exception it is deleted and ``path`` is left untouched. The parent folder is created if
    needed; the file gets ordinary read permissions (0644), as outputs are for sharing.

    >>> with atomic_path("out/image.png") as tmp:  # doctest: +SKIP
    ...     imageio.v3.imwrite(tmp, pixels, extension=".png")
    """
    final = Path(path)
    final.parent.mkdir(parents=True, exist_ok=True)
    # The temporary name keeps the final suffix, for writers that pick the format from it.
    fd, tmp_name = tempfile.mkstemp(prefix=f".{final.stem}.", suffix=f".tmp{final.suffix}", dir=final.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        # Make the data durable before the rename makes it visible.
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o644)  # mkstemp creates 0600
        os.replace(tmp, final)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (see :func:`atomic_path`); returns the path."""
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)
    return Path(path)


def atomic_write_text(path: str | os.PathLike, text: str, encoding: str = "utf-8") -> Path:
    """Write ``text`` to ``path`` atomically; returns the path."""
    return atomic_write_bytes(path, text.encode(encoding))


def save_figure(fig, path: str | os.PathLike, **savefig_kwargs) -> Path:
    """Save a matplotlib figure as PNG atomically; returns the path."""
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fig.savefig(fh, format="png", **savefig_kwargs)
    return Path(path)


def read_user_bytes(path: str | os.PathLike, kind: str) -> bytes:
    """The bytes of a user's input file; a missing or unreadable file is an
    :class:`~render.errors.InputError` naming it (``kind`` says what it is, e.g. "lamp file")."""
    from render.errors import input_error

    try:
        return Path(path).read_bytes()
    except FileNotFoundError:
        raise input_error(path, "", f"cannot read the {kind}: file not found") from None
    except OSError as err:
        raise input_error(path, "", f"cannot read the {kind}: {err.strerror or err}") from None


def read_user_text(path: str | os.PathLike, kind: str, expected: str) -> str:
    """A user's input file as UTF-8 text (a byte-order mark is allowed). Text that is not UTF-8
    is an :class:`~render.errors.InputError` naming the line of the first bad byte."""
    from render.errors import input_error

    data = read_user_bytes(path, kind)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        line = data[: err.start].count(b"\n") + 1
        raise input_error(path, f"line {line}", f"not UTF-8 text; expected {expected}") from None


_EXTENSION = re.compile(r"\.[A-Za-z][A-Za-z0-9]*$")


def looks_like_path(ref: str) -> bool:
    """Whether a reference to a lamp or a photometric distribution names a file, not a built-in id.

    Built-in ids are words joined by hyphens (``led-3000k-cie-b2``, ``generic-isotropic``); a
    file reference holds a folder separator (``/`` or ``\\``) or ends in a file extension: a dot
    followed by a letter and letters or digits (``.csv``, ``.ies``, ``.ldt``, ``.lines``). A dot
    before digits is not an extension, so a dataset key such as ``FL3.1`` is still an id (and
    gets the hint to the built-in lamp made from it).
    """
    text = str(ref).strip()
    return "/" in text or "\\" in text or _EXTENSION.search(text) is not None


def file_stem(text: str) -> str:
    """A file-name-safe stem for a view or setup name: letters, digits, '-' and '_' kept,
    everything else replaced by '-'."""
    return "".join(c if c.isalnum() or c in "-_" else "-" for c in text).strip("-") or "view"

"""Atomic file writes.

Every output file is first written to a temporary file in the destination folder and then
moved into place with :func:`os.replace` (atomic on POSIX and Windows when source and target
are on the same file system). An interrupted run therefore leaves either the previous file or
the complete new one under the final name, never a half-written file; at worst a stray
temporary ``.<stem>.<random>.tmp<suffix>`` remains.

References
----------
- POSIX ``rename()`` (atomic replacement of the target name) and ``fsync()``; Python
  documentation, :func:`os.replace`, :func:`os.fsync`, :func:`tempfile.mkstemp`.
"""

from __future__ import annotations

import contextlib
import os
import re
import stat
import tempfile
from collections.abc import Iterator
from pathlib import Path

__all__ = [
    "is_inside",
    "atomic_path",
    "atomic_write_bytes",
    "atomic_write_text",
    "file_stem",
    "looks_like_path",
    "read_user_bytes",
    "read_user_text",
    "read_user_toml",
]


@contextlib.contextmanager
def atomic_path(path: str | os.PathLike) -> Iterator[Path]:
    """Context manager yielding a temporary path to write instead of ``path``.

    On normal exit the temporary file is flushed to disk and renamed to ``path``; on an
    exception it is deleted and ``path`` is left untouched. The parent folder is created if
    needed; the file gets ordinary read permissions (0644), as outputs are for sharing.

    >>> with atomic_path("out/wipe.gif") as tmp:  # doctest: +SKIP
    ...     imageio.v3.imwrite(tmp, frames, extension=".gif")
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


def read_user_bytes(path: str | os.PathLike, kind: str) -> bytes:
    """The bytes of a user's input file, read safely.

    Only a regular file is read (not a device such as ``/dev/zero``, a pipe or a folder), and
    only up to the size limit for its ``kind`` (:data:`render.limits.FILE_SIZE_LIMITS_BYTES`);
    a path with a NUL byte, a missing, unreadable, special or oversized file is an
    :class:`~render.errors.InputError` naming it (``kind`` says what it is, e.g. "lamp file").
    The file's content is never quoted in these messages.
    """
    from render.errors import input_error
    from render.limits import file_size_limit_bytes

    text = os.fspath(path)
    if "\x00" in text:
        raise input_error(repr(text), "", f"cannot read the {kind}: the file name contains a NUL byte")
    limit = file_size_limit_bytes(kind)
    try:
        info = os.stat(text)
        if not stat.S_ISREG(info.st_mode):
            raise input_error(path, "", f"cannot read the {kind}: not a regular file")
        if info.st_size > limit:
            raise input_error(path, "", f"the {kind} is {info.st_size:,} bytes; lampcast reads at most {limit:,}")
        with open(text, "rb") as fh:
            data = fh.read(limit + 1)
    except FileNotFoundError:
        raise input_error(path, "", f"cannot read the {kind}: file not found") from None
    except (OSError, ValueError) as err:
        reason = getattr(err, "strerror", None) or str(err)
        raise input_error(path, "", f"cannot read the {kind}: {reason}") from None
    if len(data) > limit:  # grew while being read
        raise input_error(path, "", f"the {kind} is larger than {limit:,} bytes, the most lampcast reads")
    return data


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


_TOML_LINE = re.compile(r"\(at line (\d+), column (\d+)\)")
_LONG_NUMBER = re.compile(r"[0-9A-Fa-f_]{4300,}")


def _most_nested_line(text: str) -> str:
    """The line holding the most opening brackets: where a too-deeply nested value is."""
    counts = [line.count("[") + line.count("{") for line in text.split("\n")]
    return f"line {counts.index(max(counts)) + 1}" if counts else ""


def read_user_toml(path: str | os.PathLike, kind: str, expected: str) -> dict:
    """A user's TOML file (a scene, a class file) as a dict, read through
    :func:`read_user_text`. A syntax error, a number of more than 4300 digits (Python's limit on
    integer text) or nesting too deep to read is an :class:`~render.errors.InputError` naming
    the line."""
    import tomllib

    from render.errors import input_error

    text = read_user_text(path, kind, expected)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        message = str(err)
        match = _TOML_LINE.search(message)
        where = f"line {match.group(1)}" if match else ""
        raise input_error(path, where, f"TOML syntax error: {_TOML_LINE.sub('', message).strip()}") from None
    except ValueError:  # an integer of more than 4300 digits
        match = _LONG_NUMBER.search(text)
        where = f"line {text.count(chr(10), 0, match.start()) + 1}" if match else ""
        raise input_error(path, where, f"a number of more than 4300 digits; no {kind} value needs that many") from None
    except RecursionError:
        raise input_error(path, _most_nested_line(text), "arrays or tables nested too deeply to read") from None


_EXTENSION = re.compile(r"\.[A-Za-z][A-Za-z0-9]*$")


def is_inside(path: str | os.PathLike, root: str | os.PathLike) -> bool:
    """Whether ``path`` (symbolic links followed) lies inside the folder ``root`` (strict paths)."""
    try:
        return Path(path).resolve().is_relative_to(Path(root).resolve())
    except (OSError, RuntimeError, ValueError):
        return False


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

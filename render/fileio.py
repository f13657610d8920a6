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
import tempfile
from pathlib import Path
from typing import Iterator


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

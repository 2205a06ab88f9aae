"""Atomic file writes: a reader (or a crash) sees the old file or the new one, never half of one.

The data go to a temporary file in the target's folder, are flushed and fsynced, get the permissions a
plain ``open()`` would give (mkstemp makes 0600; layouts and travellers are shared with a fab), and then
replace the target with ``os.replace``.
"""

import os
import pathlib
import tempfile


def _current_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


_UMASK = _current_umask()


def atomic_write_bytes(path, data: bytes) -> pathlib.Path:
    """Write ``data`` to ``path`` atomically (parent folders created); returns the path."""
    path = pathlib.Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o666 & ~_UMASK)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def atomic_write_text(path, text: str) -> pathlib.Path:
    """Write UTF-8 ``text`` to ``path`` atomically; returns the path."""
    return atomic_write_bytes(path, text.encode("utf-8"))


def atomic_savefig(fig, path, dpi: int = 120) -> pathlib.Path:
    """Save a matplotlib figure to ``path`` atomically (the format follows the suffix) and close it."""
    import io

    import matplotlib.pyplot as plt

    path = pathlib.Path(path)
    buf = io.BytesIO()
    fig.savefig(buf, dpi=dpi, format=path.suffix.lstrip(".") or "png")
    plt.close(fig)
    return atomic_write_bytes(path, buf.getvalue())

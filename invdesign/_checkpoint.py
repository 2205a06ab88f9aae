"""Atomic checkpoints of an optimisation run, and a stop flag raised by SIGINT / SIGTERM.

A checkpoint is one ``.npz`` file (``checkpoints/latest.npz`` in the run folder) holding every array
the next step depends on — the unconstrained parameters of all starts, the optimiser state leaves, the
best point seen per start, the step count and the history so far — plus a JSON header with the run's
fingerprint. Every step of the run is a deterministic function of that state, so a run killed at any
moment (even by SIGKILL, which cannot be caught) and resumed from its last checkpoint repeats the lost
steps bit for bit and ends at the same design.

Writing: to a temporary file in the same folder, flushed and fsynced, then ``os.replace`` — a reader
sees the old or the new checkpoint, never half of one.
"""

import io
import json
import pathlib
import signal
import threading

import numpy as np

from ._atomic import atomic_write_bytes
from ._errors import SpecError

CHECKPOINT_NAME = "latest.npz"


def checkpoint_path(run_dir) -> pathlib.Path:
    return pathlib.Path(run_dir) / "checkpoints" / CHECKPOINT_NAME


def save(run_dir, arrays: dict, header: dict) -> pathlib.Path:
    """Atomically write a checkpoint: ``arrays`` (name -> ndarray) and a JSON-able ``header``."""
    path = checkpoint_path(run_dir)
    path.parent.mkdir(parents=True, exist_ok=True)
    buf = io.BytesIO()
    payload = {f"a_{k}": np.asarray(v) for k, v in arrays.items()}
    payload["header"] = np.frombuffer(json.dumps(header).encode(), dtype=np.uint8)
    np.savez(buf, **payload)
    atomic_write_bytes(path, buf.getvalue())
    return path


def load(run_dir, fingerprint: str | None = None):
    """(arrays, header) of a run's last checkpoint, or None if it has none.

    Raises ``SpecError`` when ``fingerprint`` is given and differs from the checkpoint's (the run's
    settings changed, so its state does not belong to this run).
    """
    path = checkpoint_path(run_dir)
    if not path.is_file():
        return None
    with np.load(path) as data:
        header = json.loads(bytes(data["header"]).decode())
        arrays = {k[2:]: np.array(data[k]) for k in data.files if k.startswith("a_")}
    if fingerprint is not None and header.get("fingerprint") != fingerprint:
        raise SpecError(f"resume: the checkpoint in '{path}' belongs to a run with different settings "
                        f"(spec, fab, cell, model or optimiser); resume with the run's own settings or start "
                        f"a new run")
    return arrays, header


class StopFlag:
    """Context manager: SIGINT and SIGTERM set ``.requested`` instead of killing the process.

    The optimiser checks the flag after every step, writes a checkpoint and stops cleanly. Outside the
    main thread (where Python cannot install handlers) it does nothing.
    """

    def __init__(self):
        self.requested = None
        self._old = {}

    def _handler(self, signum, _frame):
        self.requested = signal.Signals(signum).name

    def __enter__(self):
        if threading.current_thread() is threading.main_thread():
            for sig in (signal.SIGINT, signal.SIGTERM):
                self._old[sig] = signal.signal(sig, self._handler)
        return self

    def __exit__(self, *exc):
        for sig, old in self._old.items():
            signal.signal(sig, old)
        return False

"""Configure JAX before anything else imports it: CPU only, 64-bit floats, a persistent compile cache.

invdesign's physics needs float64/complex128 (lattice sums cancel large terms). The project never needs
an accelerator; forcing the CPU platform also keeps JAX from printing a "no GPU/TPU found" warning on
import. A user who really wants another platform can set ``JAX_PLATFORMS`` before importing invdesign.

Compiling an optimiser step takes tens of seconds to minutes on 2 cores (several model resolutions, each
differentiated). XLA's persistent compilation cache keeps compiled programs on disk, so a second run of
the same problem — a resume after a kill, a re-run with other targets but the same shapes, the test
suite's command-line tests — skips it (measured: a chain-of-3 value-and-gradient, 15 s first, 3 s from
the cache). The cache lives in ``$INVDESIGN_XLA_CACHE`` if set, else ``$XDG_CACHE_HOME/invdesign/xla``
(``~/.cache/invdesign/xla``); ``INVDESIGN_XLA_CACHE=off`` turns it off. Results do not depend on it.
"""

import os
import pathlib

os.environ.setdefault("JAX_PLATFORMS", "cpu")

import jax  # noqa: E402

jax.config.update("jax_enable_x64", True)


def _cache_dir() -> pathlib.Path | None:
    env = os.environ.get("INVDESIGN_XLA_CACHE", "")
    if env.lower() == "off":
        return None
    if env:
        return pathlib.Path(env).expanduser()
    base = os.environ.get("XDG_CACHE_HOME") or pathlib.Path.home() / ".cache"
    return pathlib.Path(base) / "invdesign" / "xla"


def _enable_cache() -> None:
    path = _cache_dir()
    if path is None:
        return
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError:  # read-only home, say: compile every time, as without a cache
        return
    jax.config.update("jax_compilation_cache_dir", str(path))
    jax.config.update("jax_persistent_cache_min_compile_time_secs", 1.0)


_enable_cache()

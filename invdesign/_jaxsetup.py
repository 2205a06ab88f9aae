"""Configure JAX before anything else imports it: CPU only, 64-bit floats.

invdesign's physics needs float64/complex128 (lattice sums cancel large terms). The project never needs
an accelerator; forcing the CPU platform also keeps JAX from printing a "no GPU/TPU found" warning on
import. A user who really wants another platform can set ``JAX_PLATFORMS`` before importing invdesign.
"""

import os

os.environ.setdefault("JAX_PLATFORMS", "cpu")

import jax  # noqa: E402

jax.config.update("jax_enable_x64", True)

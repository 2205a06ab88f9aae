"""Shared test tolerances and small builders. Tolerances live here, one table, with their reason."""

import pathlib
import subprocess
import sys

import numpy as np

#: relative tolerances by check kind (float64 throughout)
TOL = {
    "faddeeva": 1e-13,      # Weideman N=40 vs scipy.special.wofz; measured ≲ 2e-14
    "ewald_vs_direct": 1e-6,  # issue requirement; measured ≲ 2e-14
    "energy": 1e-8,         # R + T + A = 1 below the diffraction threshold (issue requirement)
    "gradient_fd": 1e-5,    # central finite differences with step 1e-4 nm (truncation ~ h²)
}


def direct_lattice_sum(r, k, kpar, a1_nm, a2_nm, exclude_origin, decay_lengths=40.0):
    """Brute-force Σ_n exp(i k∥·R_n) G(r - R_n) for complex k (Im k > 0 makes it converge absolutely).

    Truncated where exp(-Im k · R) < exp(-decay_lengths); pure NumPy, independent of the Ewald code path.
    """
    m = np.stack([np.asarray(a1_nm, float), np.asarray(a2_nm, float)], axis=1) * 1e-9
    r_max = decay_lengths / np.imag(k)
    nmax = int(r_max / min(np.linalg.svd(m, compute_uv=False))) + 2
    n1, n2 = np.meshgrid(np.arange(-nmax, nmax + 1), np.arange(-nmax, nmax + 1))
    pts = np.stack([n1.ravel(), n2.ravel()], 1) @ m.T
    rn = np.asarray(r, float)[None, :] - np.concatenate([pts, np.zeros((len(pts), 1))], 1)
    rr = np.linalg.norm(rn, axis=1)
    keep = (rr > 0) if exclude_origin else np.ones(len(rr), bool)
    keep &= rr < r_max
    rn, rr, pts = rn[keep], rr[keep], pts[keep]
    rhat = rn / rr[:, None]
    kr = k * rr
    g = np.exp(1j * kr) / (4 * np.pi * rr)
    a = 1 + (1j * kr - 1) / kr**2
    b = (3 - 3j * kr - kr**2) / kr**2
    outer = rhat[:, :, None] * rhat[:, None, :]
    dy = g[:, None, None] * (a[:, None, None] * np.eye(3) + b[:, None, None] * outer)
    return np.sum(dy * np.exp(1j * pts @ np.asarray(kpar))[:, None, None], axis=0)


#: A small fab deck and a one-rod cell for optimiser tests (typical values, common practice, no source).
SMALL_FAB = {"name": "f", "label": "typical values (common practice, no source)", "thickness_nm": 40.0,
             "width_nm": {"min": 40.0, "max": 120.0}, "length_nm": {"min": 60.0, "max": 400.0},
             "min_gap_nm": 20.0, "max_aspect": 8.0, "corner_radius_nm": 10.0, "grid_nm": 1.0,
             "angle_step_deg": 0.5, "period_nm": {"min": 250.0, "max": 900.0}}
SMALL_CELL = {"family": "lone_tilt", "period_nm": [500.0, 500.0],
              "start": {"length": 200.0, "width": 60.0, "angle_deg": 30.0}}

# two gold rods on glass in a 500 nm square cell: the small design of the command-line tests
PAIR_DESIGN = {"format": "invdesign.design", "version": 1, "length_unit": "nm",
               "lattice": {"a1": [500.0, 0.0], "a2": [0.0, 500.0]},
               "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
               "materials": {"gold_rakic1998": {"model": "library", "name": "gold_rakic1998"}},
               "elements": [{"shape": "rod", "material": "gold_rakic1998", "center": [-120.0, 0.0],
                             "length": 200.0, "width": 70.0, "thickness": 30.0, "angle_deg": 90.0},
                            {"shape": "rod", "material": "gold_rakic1998", "center": [120.0, 0.0],
                             "length": 260.0, "width": 70.0, "thickness": 30.0, "angle_deg": 50.0}],
               "name": "pair"}


ROOT = pathlib.Path(__file__).resolve().parent.parent


def run_cli(command: str, *args, timeout=900):
    """``invdesign COMMAND args...`` in a subprocess from the checkout's root, output captured."""
    return subprocess.run([sys.executable, "-m", "invdesign.cli", command, *args], cwd=ROOT,
                          capture_output=True, text=True, timeout=timeout)


def assert_refused(command: str, args, message: str):
    """The command exits with status 2, names ``message`` on stderr and prints no traceback."""
    done = run_cli(command, *args, timeout=300)
    assert done.returncode == 2, (done.stdout, done.stderr)
    assert message in done.stderr, done.stderr
    assert "Traceback" not in done.stderr


def check_dda_gradient(fn, guess=None, x0=(-10.0, 300.0), h=(1e-4, 1e-3)):
    """Assert that the DDA wavelength function's gradient matches central finite differences; return it.

    ``fn`` is ``_dda.wavelength_function(setup)`` for a one-material cell; the checked quantity is the
    zero-order transmitted power (first input) + 0.3 × absorbance (second input) at 700 nm, as a function
    of x = (Re ε of the material, square period in nm), Im ε = 1; ``guess`` is passed to the solve.
    """
    import jax
    import jax.numpy as jnp

    def f(x):
        out, _ = fn(jnp.asarray([x[0] + 1.0j]), jnp.float64(700.0), jnp.array([x[1], 0.0]),
                    jnp.array([0.0, x[1]]), guess)
        return out[2][0, 0] + 0.3 * out[4][1]

    x0 = jnp.asarray(x0)
    grad = np.asarray(jax.jit(jax.grad(f))(x0))
    fj = jax.jit(f)
    fd = [(fj(x0.at[i].add(h[i])) - fj(x0.at[i].add(-h[i]))) / (2 * h[i]) for i in range(2)]
    np.testing.assert_allclose(grad, np.asarray(fd), rtol=TOL["gradient_fd"])
    assert np.all(np.abs(grad) > 0)
    return grad

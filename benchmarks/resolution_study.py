"""How far each model resolution can be trusted: spectra at N = 1, 3, 5, 9, 13 dipoles per rod.

For three invented cells — wide gaps (~100 nm), medium gaps (~40 nm) and a narrow 20 nm gap — prints, per
resolution, the largest deviation of the zero-order |t_xx|² and |t_yx|² spectra from the N = 13 result,
the shift of the strongest |t_yx|² peak, and the forward and value-and-gradient cost relative to N = 1
(with the fitted scaling exponent of cost against N). Usage: python benchmarks/resolution_study.py
"""


import jax
import jax.numpy as jnp
import numpy as np
from _timing import time_calls

import invdesign

GOLD = {"au": {"model": "library", "name": "gold_rakic1998"}}


def cell(gap_nm):
    """Two perpendicular-ish rods whose facing ends are gap_nm apart (edge to edge), square 420 nm lattice."""
    x_left = -60.0
    # rod A along y, centred at x_left; rod B at 45° to its right, nearest corner gap_nm away (approx.)
    half_w = 25.0
    b_centre_x = x_left + half_w + gap_nm + 0.5 * 160.0 * np.cos(np.pi / 4) + half_w * np.sin(np.pi / 4)
    return invdesign.Design.from_json({
        "lattice": {"a1": [420.0, 0.0], "a2": [0.0, 420.0]},
        "environment": {"superstrate_index": 1.0, "substrate_index": 1.45},
        "materials": GOLD,
        "elements": [
            {"shape": "rod", "material": "au", "center": [x_left, 0.0], "length": 220.0, "width": 50.0,
             "thickness": 40.0, "angle_deg": 90.0},
            {"shape": "rod", "material": "au", "center": [float(b_centre_x), 0.0], "length": 160.0,
             "width": 50.0, "thickness": 40.0, "angle_deg": 45.0},
        ],
    })


def timed(fn, *args, repeats=3):
    jax.block_until_ready(fn(*args))  # compile first: only the run is timed
    return time_calls(lambda: fn(*args), repeats)


def main():
    wl = np.linspace(600.0, 1300.0, 141)
    resolutions = (1, 3, 5, 9, 13)
    for gap in (100.0, 40.0, 20.0):
        d = cell(gap)
        gaps = [g for _, _, g in invdesign._geometry.pair_gaps(d.elements, d.params.a1, d.params.a2)]
        print(f"\ncell with smallest gap {min(gaps):.1f} nm")
        spectra, costs = {}, {}
        for n in resolutions:
            fn, params = invdesign.forward_function(d, wl, model=invdesign.ModelOptions(dipoles_per_rod=n))
            spectra[n] = np.asarray(fn(params).t)
            if gap == 20.0:
                vg = jax.jit(jax.value_and_grad(lambda p, fn=fn: jnp.sum(jnp.abs(fn(p).t[:, 1, 0]) ** 2)))
                costs[n] = (timed(fn, params), timed(vg, params))
        ref = spectra[13]
        for n in resolutions:
            dxx = np.max(np.abs(np.abs(spectra[n][:, 0, 0]) ** 2 - np.abs(ref[:, 0, 0]) ** 2))
            dyx = np.max(np.abs(np.abs(spectra[n][:, 1, 0]) ** 2 - np.abs(ref[:, 1, 0]) ** 2))
            peak = wl[np.argmax(np.abs(spectra[n][:, 1, 0]))] - wl[np.argmax(np.abs(ref[:, 1, 0]))]
            print(f"  N={n:2d}: max|Δ|t_xx|²| = {dxx:.4f}, max|Δ|t_yx|²| = {dyx:.4f}, "
                  f"|t_yx| peak shift {peak:+.1f} nm (vs N=13)")
        if costs:
            ns = np.array(resolutions, float)
            fwd = np.array([costs[n][0] for n in resolutions])
            grd = np.array([costs[n][1] for n in resolutions])
            print("  cost relative to N=1 (forward, value+grad):",
                  ", ".join(f"N={n}: {f / fwd[0]:.1f}x/{g / grd[0]:.1f}x"
                            for n, f, g in zip(resolutions, fwd, grd, strict=True)))
            slope_f = np.polyfit(np.log(ns[1:]), np.log(fwd[1:]), 1)[0]
            slope_g = np.polyfit(np.log(ns[1:]), np.log(grd[1:]), 1)[0]
            print(f"  fitted cost exponent in N (N=3..13): forward {slope_f:.2f}, value+grad {slope_g:.2f}")


if __name__ == "__main__":
    main()

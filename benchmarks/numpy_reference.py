"""A plain-NumPy, loop-based implementation of the same periodic coupled-dipole model.

Written independently of invdesign's JAX code path (scipy.special.wofz for the Faddeeva function, the
textbook Ewald formulas written out again, Python loops over wavelengths and dipole pairs). Used twice:
as the baseline of ``forward_speed.py`` and, in tests/test_reference_model.py, as a cross-check that the
JAX model computes what its docstrings say. It reuses invdesign only for the element inverse
polarizabilities Λ (tested on their own against miepython and Gans theory) and for the truncation plan.
"""

import math

import numpy as np
from scipy.special import wofz


def _erfc_exp(u, shift):
    u = np.asarray(u, complex)
    right = u.real >= 0
    ur = np.where(right, u, -u)
    val = np.exp(shift - ur**2) * wofz(1j * ur)
    return np.where(right, val, 2 * np.exp(shift) - val)


def lattice_green(r, is_self, k, m, plan_direct, plan_recip):
    """Ewald dyadic lattice Green's tensor (k∥ = 0), NumPy; r (3,) m; m (2, 2) lattice matrix in m."""
    area = abs(np.linalg.det(m))
    e = max(math.sqrt(math.pi / area), k / 5.0)
    out = np.zeros((3, 3), complex)
    for n in plan_direct:
        rn = r - np.array([*(m @ n), 0.0])
        if is_self and not n.any():
            e0 = math.exp(k**2 / (4 * e**2))
            c = _erfc_exp(-1j * k / (2 * e), 0.0)
            dphi = -1j * k * c - 2 * e / math.sqrt(math.pi) * e0
            out += (dphi / (6 * math.pi) + e**3 * e0 / (3 * math.pi**1.5 * k**2)) * np.eye(3)
            continue
        rr = np.linalg.norm(rn)
        tp = _erfc_exp(rr * e + 1j * k / (2 * e), 1j * k * rr)
        tm = _erfc_exp(rr * e - 1j * k / (2 * e), -1j * k * rr)
        q, p = tp + tm, tp - tm
        gam = math.exp(-(rr**2) * e**2 + k**2 / (4 * e**2))
        dq = 1j * k * p - 4 * e / math.sqrt(math.pi) * gam
        d2q = -(k**2) * q + 8 * e**3 * rr / math.sqrt(math.pi) * gam
        s = q / (8 * math.pi * rr)
        ds = (dq - q / rr) / (8 * math.pi * rr)
        d2s = (d2q - 2 * dq / rr + 2 * q / rr**2) / (8 * math.pi * rr)
        rh = rn / rr
        o = np.outer(rh, rh)
        out += s * np.eye(3) + (d2s * o + ds / rr * (np.eye(3) - o)) / k**2
    b = 2 * math.pi * np.linalg.inv(m).T
    for g in plan_recip:
        kap = b @ g
        gm = -1j * np.sqrt(k**2 - kap @ kap + 0j)
        z = r[2]
        tp = _erfc_exp(gm / (2 * e) + z * e, gm * z)
        tm = _erfc_exp(gm / (2 * e) - z * e, -gm * z)
        f = (tp + tm) / (4 * area * gm)
        df = (tp - tm) / (4 * area)
        gauss = math.exp(-(z**2) * e**2) * np.exp(-(gm**2) / (4 * e**2))
        d2f = gm**2 * f - e / (area * math.sqrt(math.pi)) * gauss
        ph = np.exp(1j * kap @ r[:2])
        h = np.array([[-kap[0] ** 2 * f, -kap[0] * kap[1] * f, 1j * kap[0] * df],
                      [-kap[0] * kap[1] * f, -kap[1] ** 2 * f, 1j * kap[1] * df],
                      [1j * kap[0] * df, 1j * kap[1] * df, d2f]])
        out += ph * (f * np.eye(3) + h / k**2)
    return out


def zero_order_t(positions, lam, axes, k_all, m, plan_direct, plan_recip):
    """Zero-order transmission Jones matrices (n_wl, 2, 2) at normal incidence, by loops.

    positions (n_d, 3) m; lam (n_wl, n_d, 3) Λ; axes (n_d, 3, 3); k_all (n_wl,) 1/m.
    """
    n_d = len(positions)
    area = abs(np.linalg.det(m))
    out = np.zeros((len(k_all), 2, 2), complex)
    for w, k in enumerate(k_all):
        a = np.zeros((3 * n_d, 3 * n_d), complex)
        for i in range(n_d):
            for j in range(n_d):
                g = lattice_green(positions[i] - positions[j], i == j, k, m, plan_direct, plan_recip)
                blk = -(k**2) * g
                if i == j:
                    ainv = lam[w, i] - 1j * k**3 / (6 * math.pi)
                    blk = blk + axes[i] @ np.diag(ainv) @ axes[i].T
                a[3 * i:3 * i + 3, 3 * j:3 * j + 3] = blk
        for col, pol in enumerate(np.eye(3)[:2]):
            rhs = np.concatenate([pol * np.exp(-1j * k * positions[d, 2]) for d in range(n_d)])
            p = np.linalg.solve(a, rhs).reshape(n_d, 3)
            field = sum(p[d] * np.exp(1j * k * positions[d, 2]) for d in range(n_d))
            scat = 1j * k / (2 * area) * field
            out[w, :, col] = pol[:2] + scat[:2]
    return out

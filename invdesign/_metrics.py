"""Coherent-modulation figures of merit: pure JAX functions of a zero-order Jones matrix.

Set-up. A *signal* beam and a phase-locked *control* beam at the same wavelength fall on the
metasurface. Their input polarisations are the Jones vectors ``signal`` and ``control`` (defaults x and
y). The detected channel is the output projected onto an ideal analyzer with Jones vector ``analyzer``
(default x), taken after a 2×2 Jones matrix ``J`` of shape (..., 2, 2), indexed [output, input] in the
x–y basis. ``J`` is whatever matrix the caller picks: zero-order transmission ``t`` or reflection ``r``
from the forward model. Nothing here recomputes physics.

Conventions (every function below uses them):

* **Normalisation.** ``signal``, ``control`` and ``analyzer`` are scaled to unit norm inside
  ``channel_amplitudes``. The signal has unit field amplitude (|s| = 1), and the control has amplitude
  ``rho`` = |c|/|s| times the phase factor exp(iφ). Intensities are therefore in units of the incident
  signal intensity (the signal power fraction when ``J`` is a power-normalised zero-order matrix).
* **Analyzer conjugation.** The channel amplitudes are Hermitian projections,
  a = analyzerᴴ · J · signal and b = analyzerᴴ · J · control, so that the detected power is
  |⟨e|E_out⟩|² for a unit analyzer e (this is what an ideal polariser passes). For real (linear)
  analyzers the conjugate changes nothing. For elliptical ones it is what makes e a pass state and
  e⊥ a blocked state.
* **Phase reference.** φ is the phase of the control's complex amplitude *relative to the signal's*.
  Both are referred to the input reference plane of ``J``, and φ is added to whatever phase the
  ``control`` Jones vector already carries. The time convention is exp(-iωt), so φ > 0 means the control
  oscillation is delayed by φ/ω: the control path is longer by φ/k. The detected intensity is

      I(φ) = |a + ρ e^{iφ} b|² = |a|² + ρ²|b|² + 2ρ|a||b| cos(φ + arg b − arg a).

* **Modulation depth identity.** I_max = (|a| + ρ|b|)² and I_min = (|a| − ρ|b|)² for every ρ ≥ 0,
  since the square hides the sign. So I_max − I_min = 4ρ|a||b| always, and

      M = (I_max − I_min)/I_s = 4ρ|b|/|a| = 4·sqrt(L),   L = I_c/I_s = ρ²|b|²/|a|².

  Both regimes have the same formula. For ρ|b| ≤ |a| (M ≤ 4), I_min = (|a| − ρ|b|)². For ρ|b| > |a|
  (M > 4), I_min = (ρ|b| − |a|)². The boundary ρ|b| = |a| is the dark state (I_min = 0, M = 4). Past it,
  M keeps growing but the extinction ratio falls again.
* **Floors.** Quantities normalised by I_s = |a|² (M, L, |b|/|a|) are undefined when the signal does not
  reach the channel (a = 0). They return inf/nan there on purpose; keep |a| away from zero with an
  insertion-loss constraint. The moduli |a| and |b| use a gradient-safe square root, so the gradient is
  0 (a subgradient) rather than nan exactly at a = 0 or b = 0. That case is common: J_xy = 0 exactly for
  an untilted mirror-symmetric rod. The extinction ratio adds an absolute floor to both intensities, and
  the insertion loss clamps |a|² from below. Both floors are in the same units as the intensities and
  are documented at each function.

Band tools (``band_above_threshold``) are plain NumPy for reporting, not for gradients.

Safety: these numbers describe laser-driven experiments (two phase-locked beams, usually pulsed or
focused on a metal film). Follow the laser safety rules of your institution and your laser safety
officer, and local codes (e.g. the national laser safety standard in force). A figure computed here
never replaces a beam-path or exposure assessment.
"""

from typing import NamedTuple

import jax.numpy as jnp
import numpy as np

#: default Jones vectors (x-polarised signal and analyzer, y-polarised control)
X_POL = (1.0, 0.0)
Y_POL = (0.0, 1.0)

#: default absolute floor added to I_max and I_min in the extinction ratio (units of incident signal
#: intensity). It caps the ratio near 10·log10((I_max + 1e-12)/1e-12), i.e. about 120 dB for I_max ~ 1.
EXTINCTION_FLOOR = 1e-12
#: default lower clamp on |a|² in the insertion loss. It caps the loss at 300 dB.
TRANSMISSION_FLOOR = 1e-30


# ----------------------------------------------------------------------------------------- helpers
def _abs2(z):
    """|z|² for complex or real arrays, as a real array (smooth everywhere)."""
    return jnp.real(z) ** 2 + jnp.imag(z) ** 2


def _safe_sqrt(x):
    """sqrt(x) for x ≥ 0 with a finite (zero) gradient at x = 0 (double-where trick)."""
    pos = x > 0
    return jnp.where(pos, jnp.sqrt(jnp.where(pos, x, 1.0)), 0.0)


def _modulus(z):
    """|z| with a zero gradient, not nan, at z = 0."""
    return _safe_sqrt(_abs2(z))


def _unit(v):
    """A Jones vector (..., 2) scaled to unit norm, as complex."""
    v = jnp.asarray(v, dtype=jnp.complex128)
    return v / jnp.sqrt(jnp.sum(_abs2(v), axis=-1, keepdims=True))


# --------------------------------------------------------------------------- channel amplitudes
def channel_amplitudes(J, signal=X_POL, control=Y_POL, analyzer=X_POL):
    """Signal and control amplitudes reaching the detected channel.

    Args:
      J: (..., 2, 2) complex Jones matrix [output, input] in the x–y basis, for example the zero-order
        transmission t of shape (n_wl, 2, 2).
      signal: (2,) or (..., 2) signal input Jones vector. It is normalised to unit norm here.
      control: (2,) or (..., 2) control input Jones vector. It is normalised to unit norm here.
      analyzer: (2,) or (..., 2) analyzer Jones vector. It is normalised here and conjugated in the
        projection.

    Returns:
      (a, b): complex arrays of shape (...), with a = analyzerᴴ·J·signal and b = analyzerᴴ·J·control.
      They are dimensionless field amplitudes per unit incident amplitude.
    """
    J = jnp.asarray(J)
    e = jnp.conj(_unit(analyzer))
    s = _unit(signal)
    c = _unit(control)
    a = jnp.sum(e[..., :, None] * J * s[..., None, :], axis=(-2, -1))
    b = jnp.sum(e[..., :, None] * J * c[..., None, :], axis=(-2, -1))
    return a, b


# ---------------------------------------------------------------------------------- intensities
def signal_intensity(a):
    """I_s = |a|², the channel intensity with the control off.

    Args:
      a: (...) complex signal channel amplitude.

    Returns:
      (...) real intensity in units of the incident signal intensity.
    """
    return _abs2(a)


def control_intensity(b, rho):
    """I_c = ρ²|b|², the channel intensity of the control alone.

    Args:
      b: (...) complex control channel amplitude.
      rho: control/signal field-amplitude ratio |c|/|s| (scalar or broadcastable).

    Returns:
      (...) real intensity in units of the incident signal intensity.
    """
    return rho**2 * _abs2(b)


def intensity(a, b, rho, phi):
    """I(φ) = |a + ρ e^{iφ} b|², the detected intensity with both beams on.

    Args:
      a, b: (...) complex channel amplitudes from ``channel_amplitudes``.
      rho: control/signal amplitude ratio (broadcastable).
      phi: control phase relative to the signal, in radians (broadcastable; see the module docstring
        for the reference plane and sign).

    Returns:
      (...) real intensity in units of the incident signal intensity.
    """
    return _abs2(a + rho * jnp.exp(1j * phi) * b)


def intensity_extrema(a, b, rho):
    """Closed-form extremes of I(φ) over φ: I_max = (|a| + ρ|b|)², I_min = (|a| − ρ|b|)².

    Args:
      a, b: (...) complex channel amplitudes.
      rho: control/signal amplitude ratio, ≥ 0 (broadcastable).

    Returns:
      (i_max, i_min): (...) real intensities in units of the incident signal intensity. They are reached
      at φ* = arg a − arg b and at φ* + π.
    """
    ma, mb = _modulus(a), rho * _modulus(b)
    return (ma + mb) ** 2, (ma - mb) ** 2


# -------------------------------------------------------------------------------- depth metrics
def modulation_depth(a, b, rho):
    """Peak-to-peak modulation depth M = (I_max − I_min)/I_s = 4ρ|b|/|a|.

    This uses the factored form 4ρ|a||b|/|a|², which is exact for every ρ and avoids subtracting two
    nearly equal intensities. It equals 4·sqrt(``leakage``).

    Args:
      a, b: (...) complex channel amplitudes.
      rho: control/signal amplitude ratio, ≥ 0 (broadcastable).

    Returns:
      (...) dimensionless depth (1.0 = 100 %). It is inf or nan where a = 0.
    """
    return 4.0 * rho * _modulus(b) / _modulus(a)


def fixed_phase_depth(a, b, rho, phi_ref=0.0):
    """Depth between two fixed control phases: (I(φ_ref + π) − I(φ_ref))/I_s.

    The default φ_ref = 0 gives (I(π) − I(0))/I_s, where φ is the control phase relative to the signal
    at the input reference plane of J (module docstring). In closed form,
    −4ρ Re(a* b e^{iφ_ref})/|a|² = M·cos(φ_ref − φ* + π). Its magnitude is at most M, with equality when
    φ_ref is φ* or φ* + π. Across a band with the phases held fixed, it falls off as φ*(λ) drifts.

    Args:
      a, b: (...) complex channel amplitudes.
      rho: control/signal amplitude ratio (broadcastable).
      phi_ref: reference control phase in radians (broadcastable).

    Returns:
      (...) signed, dimensionless depth. It is inf or nan where a = 0.
    """
    return -4.0 * rho * jnp.real(jnp.conj(a) * b * jnp.exp(1j * phi_ref)) / _abs2(a)


def extinction_ratio_db(a, b, rho, floor=EXTINCTION_FLOOR):
    """Extinction ratio 10·log10((I_max + floor)/(I_min + floor)) in dB.

    The absolute ``floor`` is added to both intensities. That keeps the value and its gradient finite at
    the dark state I_min = 0, gives 0 dB when both vanish, and caps the ratio near
    10·log10(I_max/floor). It biases the result only where I_min is comparable to ``floor``.

    Args:
      a, b: (...) complex channel amplitudes.
      rho: control/signal amplitude ratio, ≥ 0 (broadcastable).
      floor: intensity floor in units of the incident signal intensity (default ``EXTINCTION_FLOOR``).

    Returns:
      (...) real, in dB.
    """
    i_max, i_min = intensity_extrema(a, b, rho)
    return 10.0 * jnp.log10((i_max + floor) / (i_min + floor))


def leakage(a, b, rho):
    """Leakage L = I_c/I_s = ρ²|b|²/|a|²: control power in the channel relative to the signal's.

    Args:
      a, b: (...) complex channel amplitudes.
      rho: control/signal amplitude ratio (broadcastable).

    Returns:
      (...) dimensionless ratio. It is inf or nan where a = 0.
    """
    return control_intensity(b, rho) / signal_intensity(a)


def control_leakage_fraction(b):
    """|b|²: the fraction of the control's own incident power that reaches the channel.

    Args:
      b: (...) complex control channel amplitude.

    Returns:
      (...) real, per unit incident control power, independent of ρ.
    """
    return _abs2(b)


def insertion_loss_db(a, floor=TRANSMISSION_FLOOR):
    """Signal insertion loss −10·log10(|a|²) in dB (positive = loss).

    Args:
      a: (...) complex signal channel amplitude.
      floor: lower clamp on |a|² (default ``TRANSMISSION_FLOOR``, which caps the loss at 300 dB). Below
        the clamp the gradient is zero.

    Returns:
      (...) real, in dB.
    """
    return -10.0 * jnp.log10(jnp.maximum(_abs2(a), floor))


def cross_coupling_ratio(a, b):
    """|b|/|a|: control-to-signal amplitude ratio in the channel, per unit input amplitude.

    Args:
      a, b: (...) complex channel amplitudes.

    Returns:
      (...) dimensionless. M = 4ρ·(this) and L = ρ²·(this)². It is inf or nan where a = 0.
    """
    return _modulus(b) / _modulus(a)


def cross_polarised_power(J):
    """Cross-polarised power fractions |J_yx|² (x in → y out) and |J_xy|² (y in → x out).

    Args:
      J: (..., 2, 2) complex Jones matrix [output, input] in the x–y basis.

    Returns:
      (p_yx, p_xy): (...) real arrays. These are power fractions when J is power-normalised, for example
      zero-order transmission between identical media.
    """
    J = jnp.asarray(J)
    return _abs2(J[..., 1, 0]), _abs2(J[..., 0, 1])


# ------------------------------------------------------------------- inverse relations and bounds
def control_power_ratio_for_depth(a, b, m_target):
    """Control/signal power ratio ρ² that gives a target peak-to-peak depth M.

    M = 4ρ|b|/|a| holds in both regimes (module docstring), so inverting it gives

        ρ² = (M·|a| / (4|b|))².

    The regime depends only on the target. M ≤ 4 gives ρ|b| ≤ |a| and I_min = (|a| − ρ|b|)². M > 4 gives
    ρ|b| > |a| and I_min = (ρ|b| − |a|)². M = 4 gives the dark state (``dark_state_power_ratio``). Any
    M > 0 is reachable with a large enough control, unless the control does not reach the channel
    (b = 0). In that case the result is +inf, meaning the target is unreachable. Whether the needed ρ²
    is practical (damage threshold, available power) is for the caller to decide. A negative target
    gives nan.

    Args:
      a, b: (...) complex channel amplitudes.
      m_target: target depth, dimensionless (1.0 = 100 %), ≥ 0 (broadcastable).

    Returns:
      (...) real ρ² (dimensionless power ratio); +inf where unreachable, nan for m_target < 0.
    """
    b2 = _abs2(b)
    reach = b2 > 0
    rho2 = (m_target / 4.0) ** 2 * _abs2(a) / jnp.where(reach, b2, 1.0)
    rho2 = jnp.where(reach, rho2, jnp.where(m_target == 0, 0.0, jnp.inf))
    return jnp.where(m_target < 0, jnp.nan, rho2)


def dark_state_power_ratio(a, b):
    """ρ² = |a|²/|b|² at which I_min = 0 (full extinction, M = 4), the regime boundary.

    Args:
      a, b: (...) complex channel amplitudes.

    Returns:
      (...) real, dimensionless. It is inf where b = 0.
    """
    return _abs2(a) / _abs2(b)


def identity_floor_leakage(m_target):
    """Smallest leakage L compatible with a depth M: (M/4)², from M = 4·sqrt(L).

    Args:
      m_target: target peak-to-peak depth, dimensionless (1.0 = 100 %).

    Returns:
      The leakage floor (same shape), dimensionless. For M = 1 it is 0.0625.
    """
    return (jnp.asarray(m_target) / 4.0) ** 2


class SpecVerdict(NamedTuple):
    """Outcome of ``check_spec_feasible``."""

    feasible: bool
    leakage_floor: float
    message: str


def check_spec_feasible(m_target, leakage_ceiling):
    """Check a (depth, leakage ceiling) specification against the identity M = 4·sqrt(L).

    Any design in this single-channel set-up must have L = (M/4)² exactly. A ceiling below that floor
    cannot be met by any unit cell, whatever the geometry. This is plain Python (not for jit).

    Args:
      m_target: target peak-to-peak depth, dimensionless (1.0 = 100 %), > 0.
      leakage_ceiling: largest acceptable leakage I_c/I_s, dimensionless, ≥ 0.

    Returns:
      ``SpecVerdict(feasible, leakage_floor, message)``. The message quotes both numbers.

    Raises:
      ValueError: if m_target ≤ 0 or leakage_ceiling < 0, or either is not finite.
    """
    m = float(m_target)
    ceil = float(leakage_ceiling)
    if not (np.isfinite(m) and m > 0):
        raise ValueError(f"target modulation depth must be a finite number > 0, got {m_target!r}")
    if not (np.isfinite(ceil) and ceil >= 0):
        raise ValueError(f"leakage ceiling must be a finite number >= 0, got {leakage_ceiling!r}")
    floor = float(identity_floor_leakage(m))
    # Common-practice figure, no source (carried over from the project brief, not verified here):
    # measured coherent modulators are said to reach about 8 % leakage at 100 % modulation, just above
    # the identity floor (1/4)² = 6.25 %.
    if ceil < floor:
        msg = (
            f"infeasible: a modulation depth of {m:.6g} ({100 * m:.4g} %) needs leakage "
            f"L = (M/4)^2 = {floor:.6g} ({100 * floor:.4g} %), but the ceiling is {ceil:.6g} "
            f"({100 * ceil:.4g} %). M = 4*sqrt(L) holds for every unit cell in this channel set-up. "
            f"Lower the depth to at most {4 * np.sqrt(ceil):.6g} "
            f"or raise the ceiling to at least {floor:.6g}."
        )
        return SpecVerdict(False, floor, msg)
    msg = (
        f"feasible: a modulation depth of {m:.6g} needs leakage L = (M/4)^2 = {floor:.6g}, within the "
        f"ceiling {ceil:.6g} (margin {ceil - floor:.3g})."
    )
    return SpecVerdict(True, floor, msg)


# ------------------------------------------------------------------------------ optimal phase
def optimal_phase(a, b):
    """Control phase φ* = arg(a·b*) = arg a − arg b that maximises I(φ), in (−π, π] radians.

    I(φ) is minimal at φ* + π. φ* is undefined, and its gradient nan, where a = 0 or b = 0.

    Args:
      a, b: (...) complex channel amplitudes.

    Returns:
      (...) real, radians.
    """
    return jnp.angle(a * jnp.conj(b))


def optimal_phase_unwrapped_deg(phi_star, axis=-1):
    """φ*(λ) unwrapped along the wavelength axis, in degrees.

    Args:
      phi_star: (..., n_wl) radians, from ``optimal_phase``, sampled finely enough that consecutive
        samples differ by less than π.
      axis: the wavelength axis.

    Returns:
      Same shape, in degrees.
    """
    return jnp.degrees(jnp.unwrap(phi_star, axis=axis))


def optimal_phase_drift_deg(phi_star, axis=-1):
    """Drift of φ* across the band: max − min of the unwrapped φ*(λ), in degrees (≥ 0).

    Args:
      phi_star: (..., n_wl) radians, from ``optimal_phase``.
      axis: the wavelength axis.

    Returns:
      (...) real, degrees. It is 0 for a single wavelength.
    """
    u = optimal_phase_unwrapped_deg(jnp.atleast_1d(phi_star), axis=axis)
    return jnp.max(u, axis=axis) - jnp.min(u, axis=axis)


# ------------------------------------------------------------------------------- band metrics
class BandEdges(NamedTuple):
    """The contiguous wavelength interval around an operating point where a metric meets a threshold.

    ``lower_open`` / ``upper_open`` are True when the interval runs into the end of the sampled band,
    so the true edge lies outside the data and ``width_nm`` is only a lower bound.
    """

    lower_nm: float
    upper_nm: float
    width_nm: float
    lower_open: bool
    upper_open: bool


def band_above_threshold(wavelength_nm, values, operating_nm, threshold):
    """Width of the contiguous region around ``operating_nm`` where ``values`` ≥ ``threshold``.

    Plain NumPy, for reports. The curve is taken as piecewise linear between samples, and each edge is
    the linear-interpolation crossing between the last sample at or above the threshold and the first
    below it. To get the depth M(λ) at a fixed ρ and fixed phases, pass ``modulation_depth`` (phase
    re-optimised per λ) or ``fixed_phase_depth`` with φ_ref fixed at its value at the operating point
    (phase held over the band).

    Args:
      wavelength_nm: (n_wl,) strictly increasing wavelengths, nm.
      values: (n_wl,) real metric, for example M(λ).
      operating_nm: operating wavelength, nm, inside the sampled range.
      threshold: the level to stay at or above.

    Returns:
      ``BandEdges`` in nm. If the metric at the operating point (interpolated) is below the threshold,
      the width is 0 and both edges equal ``operating_nm``.

    Raises:
      ValueError: for mismatched shapes, non-increasing wavelengths, non-finite values, or an operating
        point outside the band.
    """
    wl = np.asarray(wavelength_nm, dtype=float)
    v = np.asarray(values, dtype=float)
    if wl.ndim != 1 or v.shape != wl.shape or wl.size < 2:
        raise ValueError("wavelength_nm and values must be 1-D arrays of the same length (>= 2)")
    if not np.all(np.diff(wl) > 0):
        raise ValueError("wavelength_nm must be strictly increasing")
    if not (np.all(np.isfinite(v)) and np.all(np.isfinite(wl))):
        raise ValueError("wavelength_nm and values must be finite")
    w0 = float(operating_nm)
    if not (wl[0] <= w0 <= wl[-1]):
        raise ValueError(f"operating wavelength {w0} nm lies outside the sampled band [{wl[0]}, {wl[-1]}] nm")
    v0 = float(np.interp(w0, wl, v))
    if v0 < threshold:
        return BandEdges(w0, w0, 0.0, False, False)

    def crossing(x_in, y_in, x_out, y_out):
        # linear interpolation between an inside point (y_in >= threshold) and an outside one
        return x_in + (threshold - y_in) * (x_out - x_in) / (y_out - y_in)

    # upward scan from the operating point
    x_prev, y_prev = w0, v0
    upper, upper_open = wl[-1], True
    for x, y in zip(wl[wl > w0], v[wl > w0], strict=True):
        if y < threshold:
            upper, upper_open = crossing(x_prev, y_prev, x, y), False
            break
        x_prev, y_prev = x, y
    # downward scan
    x_prev, y_prev = w0, v0
    lower, lower_open = wl[0], True
    for x, y in zip(wl[wl < w0][::-1], v[wl < w0][::-1], strict=True):
        if y < threshold:
            lower, lower_open = crossing(x_prev, y_prev, x, y), False
            break
        x_prev, y_prev = x, y
    return BandEdges(float(lower), float(upper), float(upper - lower), lower_open, upper_open)


# ----------------------------------------------------------------------------------- bundle
class CoherentMetrics(NamedTuple):
    """All per-wavelength coherent-modulation metrics for one Jones array (a JAX pytree).

    Every field has the Jones array's leading shape (...), for example (n_wl,), except
    ``phase_drift_deg``, which reduces the last leading axis (wavelength). Units are as in the function
    with the same name. Intensities are in units of the incident signal intensity.
    """

    a: jnp.ndarray
    b: jnp.ndarray
    signal_intensity: jnp.ndarray
    control_intensity: jnp.ndarray
    intensity: jnp.ndarray  # I(φ) at the given φ
    i_max: jnp.ndarray
    i_min: jnp.ndarray
    modulation_depth: jnp.ndarray
    fixed_phase_depth: jnp.ndarray  # (I(φ + π) − I(φ))/I_s at the given φ
    extinction_ratio_db: jnp.ndarray
    leakage: jnp.ndarray
    control_leakage_fraction: jnp.ndarray
    insertion_loss_db: jnp.ndarray
    cross_coupling_ratio: jnp.ndarray
    optimal_phase: jnp.ndarray  # radians
    phase_drift_deg: jnp.ndarray
    cross_pol_yx: jnp.ndarray  # |J_yx|²
    cross_pol_xy: jnp.ndarray  # |J_xy|²


def all_metrics(J, *, signal=X_POL, control=Y_POL, analyzer=X_POL, rho=1.0, phi=0.0):
    """Evaluate every metric for a Jones array at a control ratio ρ and phase φ.

    Args:
      J: (..., n_wl, 2, 2) complex Jones matrix [output, input], e.g. zero-order t. A single (2, 2)
        matrix also works (drift 0).
      signal, control, analyzer: Jones vectors (2,) or broadcastable (..., 2); see ``channel_amplitudes``.
      rho: control/signal amplitude ratio (broadcastable).
      phi: control phase relative to the signal, radians. It sets ``intensity`` = I(φ) and is the
        reference of ``fixed_phase_depth`` = (I(φ + π) − I(φ))/I_s. φ = 0 gives (I(π) − I(0))/I_s.

    Returns:
      ``CoherentMetrics``. It works under jit, grad and vmap.
    """
    a, b = channel_amplitudes(J, signal, control, analyzer)
    i_max, i_min = intensity_extrema(a, b, rho)
    p_yx, p_xy = cross_polarised_power(J)
    phi_star = optimal_phase(a, b)
    return CoherentMetrics(
        a=a,
        b=b,
        signal_intensity=signal_intensity(a),
        control_intensity=control_intensity(b, rho),
        intensity=intensity(a, b, rho, phi),
        i_max=i_max,
        i_min=i_min,
        modulation_depth=modulation_depth(a, b, rho),
        fixed_phase_depth=fixed_phase_depth(a, b, rho, phi),
        extinction_ratio_db=extinction_ratio_db(a, b, rho),
        leakage=leakage(a, b, rho),
        control_leakage_fraction=control_leakage_fraction(b),
        insertion_loss_db=insertion_loss_db(a),
        cross_coupling_ratio=cross_coupling_ratio(a, b),
        optimal_phase=phi_star,
        phase_drift_deg=optimal_phase_drift_deg(phi_star),
        cross_pol_yx=p_yx,
        cross_pol_xy=p_xy,
    )

"""What the modulator must do, what the fab can make and which cell family to search: parsing and checks.

Three inputs, each a plain mapping (a Hydra config group converted with ``OmegaConf.to_container`` or a
dict written by hand), each turned into a frozen dataclass:

* ``Spec`` (``conf/spec/*.yaml``): operating wavelength and band, environment and metal, the detected
  channel (Jones vectors of signal, control and analyzer; transmission or reflection), the beams (control
  amplitude ratio ρ and phase reference φ_ref) and the goals, each a metric with a sense (``>=``, ``<=``,
  ``=``), a target and a weight.
* ``FabDeck`` (``conf/fab/*.yaml``): film thickness(es), rod width and length ranges, minimum
  edge-to-edge gap (inside the cell and across the periodic boundary), maximum aspect ratio, corner
  radius, placement grid, angle step and period range; optionally a ``tolerance`` block (``FabTolerance``):
  the standard deviations of the fab's Gaussian errors, run-to-run (global) and element-to-element (local).
* ``CellSpec`` (``conf/cell/*.yaml``): the cell family and its start values; which parameters are free.

Every mistake raises ``SpecError`` naming the key (``spec.goals[1].sense``) and what would be valid, before
anything is compiled. ``check_setup`` adds the checks that need all three (the modulation identity, the
zero-order rule against the period range, start values inside the deck).

Goal metrics (all evaluated at the operating wavelength unless stated; see ``invdesign._metrics``):

==================== ===== ============================================================== ==============
metric               unit  meaning                                                        default scale
==================== ===== ============================================================== ==============
modulation_depth     1     peak-to-peak depth M = (I_max − I_min)/I_s at ρ                |target|
fixed_phase_depth    1     (I(φ_ref + π) − I(φ_ref))/I_s at ρ and the spec's phase ref.    |target|
leakage              1     L = I_c/I_s at ρ                                                |target|
control_power_ratio  1     ρ² needed for the goal's ``depth`` (default: the M target)      |target|
insertion_loss_db    dB    −10·log10|a|² of the signal                                     1 dB
bandwidth_nm         nm    width of the band around λ0 where the fixed-phase depth stays   |target|
                           at or above ``depth`` (phases held at their λ0 optimum)
phase_drift_deg      deg   drift of the best control phase over ``window_nm`` around λ0    10 deg
==================== ===== ============================================================== ==============

The scale of a goal is the amount of its metric that counts as "one unit of miss" in the loss (see
``invdesign._optimize``); it can be set per goal with ``scale``.
"""

import dataclasses
import math

import numpy as np

from ._errors import MaterialError, SpecError
from ._materials import LIBRARY, material_from_dict

SENSES = (">=", "<=", "=")

#: metric -> (unit, default scale rule); "target" means |target| (falling back to 1 if target is 0)
GOAL_METRICS = {
    "modulation_depth": ("", "target"),
    "fixed_phase_depth": ("", "target"),
    "leakage": ("", "target"),
    "control_power_ratio": ("", "target"),
    "insertion_loss_db": ("dB", 1.0),
    "bandwidth_nm": ("nm", "target"),
    "phase_drift_deg": ("deg", 10.0),
}

CELL_FAMILIES = ("free_rods", "lone_tilt", "pivot_pair")
ROD_FIELDS = ("center", "length", "width", "angle")


# ----------------------------------------------------------------------------------- dataclasses
@dataclasses.dataclass(frozen=True)
class Goal:
    """One target. ``scale`` is in the metric's unit; ``tolerance`` only for sense "="."""

    metric: str
    sense: str
    target: float
    weight: float
    scale: float
    tolerance: float = 0.0
    depth: float | None = None      # control_power_ratio, bandwidth_nm: the depth the goal refers to
    window_nm: float | None = None  # phase_drift_deg: full width of the window around λ0

    @property
    def unit(self) -> str:
        return GOAL_METRICS[self.metric][0]

    def describe(self) -> str:
        tol = f" ± {self.tolerance:g}" if self.sense == "=" else ""
        unit = f" {self.unit}" if self.unit else ""
        return f"{self.metric} {self.sense} {self.target:g}{tol}{unit}"

    def met(self, value: float) -> bool:
        """Exact pass/fail of a value (no margin)."""
        if not math.isfinite(value):
            return False
        if self.sense == ">=":
            return value >= self.target
        if self.sense == "<=":
            return value <= self.target
        return abs(value - self.target) <= self.tolerance

    def shortfall(self, value: float) -> float:
        """Signed distance from the goal (metric's unit): > 0 misses by that much, <= 0 met with margin."""
        if not math.isfinite(value):
            return math.inf
        if self.sense == ">=":
            return self.target - value
        if self.sense == "<=":
            return value - self.target
        return abs(value - self.target) - self.tolerance

    def miss(self, value: float) -> float:
        """By how much (in the metric's unit) a value misses the goal; 0 when met."""
        return max(self.shortfall(value), 0.0)


@dataclasses.dataclass(frozen=True)
class Spec:
    """A coherent-modulation specification (see the module docstring)."""

    name: str
    description: str
    operating_nm: float
    band_start_nm: float
    band_stop_nm: float
    band_count: int
    superstrate_index: float
    substrate_index: float
    material: dict          # a design-file material entry
    material_key: str       # its name inside the design
    matrix: str             # "t" or "r"
    signal: tuple
    control: tuple
    analyzer: tuple
    rho: float
    phi_ref_deg: float
    goals: tuple
    allow_diffraction: bool

    def wavelengths(self) -> tuple[np.ndarray, int]:
        """The optimisation grid (nm): the band's linspace plus the operating wavelength, and its index."""
        wl = np.linspace(self.band_start_nm, self.band_stop_nm, self.band_count)
        if not np.any(np.isclose(wl, self.operating_nm, rtol=0, atol=1e-9)):
            wl = np.sort(np.append(wl, self.operating_nm))
        i0 = int(np.argmin(np.abs(wl - self.operating_nm)))
        wl[i0] = self.operating_nm
        return wl, i0

    def goal(self, metric: str):
        """The goals with a given metric (a tuple, possibly empty)."""
        return tuple(g for g in self.goals if g.metric == metric)

    def depth_target(self) -> float | None:
        """The modulation-depth floor of the spec (from a ``>=`` or ``=`` modulation_depth goal)."""
        lows = [g.target - g.tolerance for g in self.goal("modulation_depth") if g.sense in (">=", "=")]
        return max(lows) if lows else None


#: tolerance block: quantity key -> (meaning, unit, components it accepts)
TOLERANCE_QUANTITIES = {
    "width_nm": ("rod width (disk diameter)", "nm", ("global", "local")),
    "length_nm": ("rod length", "nm", ("global", "local")),
    "position_nm": ("element centre, each of x and y", "nm", ("local",)),
    "angle_deg": ("rod angle", "deg", ("global", "local")),
    "thickness_nm": ("metal film thickness", "nm", ("global", "local")),
    "corner_radius_nm": ("corner rounding radius", "nm", ("global", "local")),
}


@dataclasses.dataclass(frozen=True)
class FabTolerance:
    """Standard deviations (1σ) of the fab's Gaussian errors: ``sigma[(quantity, component)]``.

    quantity is a ``TOLERANCE_QUANTITIES`` key (unit in its name: nm or deg); component is ``global``
    (one draw per fabrication run, shared by every element) or ``local`` (an independent draw per
    element). Missing entries are 0. The error model itself is stated in ``invdesign._tolerance``.
    """

    label: str
    sigma: tuple = ()   # ((quantity, component, σ), ...) in TOLERANCE_QUANTITIES order

    def get(self, quantity: str, component: str) -> float:
        for q, c, v in self.sigma:
            if q == quantity and c == component:
                return v
        return 0.0

    def combined(self, quantity: str) -> float:
        """sqrt(σ_global² + σ_local²): the total spread of one element's value."""
        return math.hypot(self.get(quantity, "global"), self.get(quantity, "local"))


@dataclasses.dataclass(frozen=True)
class FabDeck:
    """A fab rule deck, lengths in nm."""

    name: str
    label: str
    thickness_nm: tuple
    width_min_nm: float
    width_max_nm: float
    length_min_nm: float
    length_max_nm: float
    min_gap_nm: float
    max_aspect: float
    corner_radius_nm: float
    grid_nm: float
    angle_step_deg: float
    period_min_nm: float
    period_max_nm: float
    tolerance: FabTolerance | None = None


@dataclasses.dataclass(frozen=True)
class RodStart:
    """Start values of one rod of a free cell, and which of its fields stay fixed."""

    center: tuple
    length: float
    width: float
    angle_deg: float
    fixed: frozenset


@dataclasses.dataclass(frozen=True)
class CellSpec:
    """A cell family and its start values (nm, degrees)."""

    family: str
    name: str
    period_nm: tuple          # (px, py) of the rectangular start lattice
    period_free: bool         # the lattice scales as a whole (aspect px/py fixed)
    thickness_nm: float | None
    angle_range_deg: tuple
    rods: tuple = ()          # free_rods
    values: dict = dataclasses.field(default_factory=dict)  # named families: start values
    free: tuple = ()          # named families: which named values are free


# ----------------------------------------------------------------------------------- the reader
class _Reader:
    """Reads one mapping, remembering the key path for messages."""

    def __init__(self, doc, where: str, known: dict):
        if not isinstance(doc, dict):
            raise SpecError(f"{where} must be a mapping of keys to values, got {type(doc).__name__} {doc!r}")
        self.doc, self.where, self.known = doc, where, known
        unknown = sorted(set(map(str, doc)) - set(known))
        if unknown:
            raise SpecError(f"{where}: unknown key '{unknown[0]}'; valid keys are: "
                            f"{', '.join(sorted(known))}")

    def key(self, k):
        return f"{self.where}.{k}"

    def has(self, k) -> bool:
        return k in self.doc and self.doc[k] is not None

    def raw(self, k, default=...):
        if not self.has(k):
            if default is ...:
                raise SpecError(f"{self.key(k)} is missing: {self.known[k]}")
            return default
        return self.doc[k]

    def number(self, k, default=..., *, positive=False, minimum=None, integer=False):
        v = self.raw(k, default)
        if v is None:
            return None
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(float(v)):
            raise SpecError(f"{self.key(k)} must be a finite number ({self.known[k]}), got {v!r}")
        if integer and float(v) != int(v):
            raise SpecError(f"{self.key(k)} must be a whole number ({self.known[k]}), got {v!r}")
        if positive and v <= 0:
            raise SpecError(f"{self.key(k)} must be > 0 ({self.known[k]}), got {v!r}")
        if minimum is not None and v < minimum:
            raise SpecError(f"{self.key(k)} must be at least {minimum} ({self.known[k]}), got {v!r}")
        return int(v) if integer else float(v)

    def text(self, k, default=..., choices=None):
        v = self.raw(k, default)
        if v is None:
            return None
        if not isinstance(v, str):
            raise SpecError(f"{self.key(k)} must be text ({self.known[k]}), got {v!r}")
        if choices is not None and v not in choices:
            raise SpecError(f"{self.key(k)} = {v!r} is not valid; use one of: {', '.join(choices)}")
        return v

    def flag(self, k, default=...):
        v = self.raw(k, default)
        if not isinstance(v, bool):
            raise SpecError(f"{self.key(k)} must be true or false, got {v!r}")
        return v

    def sub(self, k, known, default=...):
        v = self.raw(k, default)
        return _Reader(v, self.key(k), known)

    def pair(self, k, default=..., *, nonzero=False, positive=False):
        v = self.raw(k, default)
        if not isinstance(v, (list, tuple)) or len(v) != 2 or any(
                isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(float(x))
                for x in v):
            raise SpecError(f"{self.key(k)} must be a list of two numbers ({self.known[k]}), got {v!r}")
        out = (float(v[0]), float(v[1]))
        if nonzero and out == (0.0, 0.0):
            raise SpecError(f"{self.key(k)} must not be the zero vector ({self.known[k]})")
        if positive and min(out) <= 0:
            raise SpecError(f"{self.key(k)} must have two positive entries ({self.known[k]}), got {v!r}")
        return out


def _range(r: _Reader, k: str, *, positive=True):
    sub = r.sub(k, {"min": "smallest allowed value", "max": "largest allowed value"})
    lo = sub.number("min", positive=positive)
    hi = sub.number("max", positive=positive)
    if lo > hi:
        raise SpecError(f"{r.key(k)}: min ({lo:g}) is larger than max ({hi:g}); give min <= max")
    return lo, hi


def _to_plain(doc):
    try:
        from omegaconf import DictConfig, ListConfig, OmegaConf
    except ImportError:  # pragma: no cover - hydra is a dependency
        return doc
    if isinstance(doc, (DictConfig, ListConfig)):
        return OmegaConf.to_container(doc, resolve=True)
    return doc


# ----------------------------------------------------------------------------------------- spec
_SPEC_KEYS = {
    "name": "a short name for the spec",
    "description": "free text",
    "operating_nm": "the operating (vacuum) wavelength in nm",
    "band": "the optimisation band {start_nm, stop_nm, count} containing operating_nm",
    "environment": "{superstrate_index, substrate_index}",
    "material": "a built-in material name (e.g. gold_rakic1998) or a design-file material entry",
    "channel": "{matrix: t|r, signal: [x, y], control: [x, y], analyzer: [x, y]}",
    "beams": "{rho: control/signal amplitude ratio, phi_ref_deg: phase reference in degrees}",
    "goals": "a list of {metric, sense, target, weight, ...}",
    "allow_diffraction": "true to allow periods at which higher diffraction orders propagate",
}
_GOAL_KEYS = {
    "metric": f"one of {', '.join(GOAL_METRICS)}",
    "sense": "one of >=, <=, =",
    "target": "the target value in the metric's unit",
    "weight": "relative weight in the loss, > 0 (default 1)",
    "scale": "the amount of the metric that counts as one unit of miss (default per metric)",
    "tolerance": "half-width of the accepted interval for sense '=' (> 0)",
    "depth": "the modulation depth the goal refers to (control_power_ratio, bandwidth_nm)",
    "window_nm": "full width of the window around operating_nm (phase_drift_deg)",
}


def parse_spec(doc, where: str = "spec") -> Spec:
    """A ``Spec`` from a mapping; raises ``SpecError`` naming the key on any mistake."""
    r = _Reader(_to_plain(doc), where, _SPEC_KEYS)
    name = r.text("name", "spec")
    op = r.number("operating_nm", positive=True)
    band = r.sub("band", {"start_nm": "first wavelength, nm", "stop_nm": "last wavelength, nm",
                          "count": "number of wavelengths (>= 2)"})
    start, stop = band.number("start_nm", positive=True), band.number("stop_nm", positive=True)
    count = band.number("count", integer=True, minimum=2)
    if not start < stop:
        raise SpecError(f"{band.key('start_nm')} ({start:g}) must be below {band.key('stop_nm')} ({stop:g})")
    if not start <= op <= stop:
        raise SpecError(f"{r.key('operating_nm')} = {op:g} nm lies outside {r.key('band')} "
                        f"[{start:g}, {stop:g}] nm; widen the band or move the operating wavelength")
    env = r.sub("environment", {"superstrate_index": "real index above the cell (>= 1)",
                                "substrate_index": "real index of the substrate (>= 1)"})
    n_sup = env.number("superstrate_index", minimum=1.0)
    n_sub = env.number("substrate_index", minimum=1.0)
    mat_raw = r.raw("material")
    if isinstance(mat_raw, str):
        if mat_raw not in LIBRARY:
            raise SpecError(f"{r.key('material')} = {mat_raw!r} is not a built-in material; use one of: "
                            f"{', '.join(sorted(LIBRARY))}, or a design-file material entry")
        mat_entry = {"model": "library", "name": mat_raw}
        mat_key = mat_raw
    elif isinstance(mat_raw, dict):
        mat_entry, mat_key = dict(mat_raw), "metal"
    else:
        raise SpecError(f"{r.key('material')} must be a material name or a material entry, got {mat_raw!r}")
    try:
        material = material_from_dict(mat_entry, mat_key)
        material.check_range(np.array([start, stop]), where=r.key("material"))
    except MaterialError as err:
        raise SpecError(f"{r.key('material')} / {r.key('band')}: {err}") from None
    ch = r.sub("channel", {"matrix": "t (zero-order transmission) or r (zero-order reflection)",
                           "signal": "signal input Jones vector [x, y]",
                           "control": "control input Jones vector [x, y]",
                           "analyzer": "analyzer Jones vector [x, y]"}, {})
    matrix = ch.text("matrix", "t", choices=("t", "r"))
    signal = ch.pair("signal", [1.0, 0.0], nonzero=True)
    control = ch.pair("control", [0.0, 1.0], nonzero=True)
    analyzer = ch.pair("analyzer", [1.0, 0.0], nonzero=True)
    beams = r.sub("beams", {"rho": "control/signal field amplitude ratio (> 0)",
                            "phi_ref_deg": "control phase reference in degrees"}, {})
    rho = beams.number("rho", 1.0, positive=True)
    phi_ref = beams.number("phi_ref_deg", 0.0)
    goals_raw = r.raw("goals")
    if not isinstance(goals_raw, list) or not goals_raw:
        raise SpecError(f"{r.key('goals')} must be a non-empty list of goals, each {{metric, sense, target}}")
    goals = tuple(_parse_goal(g, f"{r.key('goals')}[{i}]") for i, g in enumerate(goals_raw))
    spec = Spec(name=name, description=r.text("description", ""), operating_nm=op, band_start_nm=start,
                band_stop_nm=stop, band_count=count, superstrate_index=n_sup, substrate_index=n_sub,
                material=mat_entry, material_key=mat_key, matrix=matrix, signal=signal, control=control,
                analyzer=analyzer, rho=rho, phi_ref_deg=phi_ref, goals=goals,
                allow_diffraction=r.flag("allow_diffraction", False))
    _check_goals(spec, where)
    return spec


def _parse_goal(doc, where: str) -> Goal:
    g = _Reader(doc, where, _GOAL_KEYS)
    metric = g.text("metric", choices=tuple(GOAL_METRICS))
    sense = g.text("sense", choices=SENSES)
    target = g.number("target")
    weight = g.number("weight", 1.0, positive=True)
    tol = g.number("tolerance", 0.0, minimum=0.0)
    if sense == "=" and tol <= 0:
        raise SpecError(f"{g.key('tolerance')} is needed for sense '=' and must be > 0 (the accepted "
                        f"interval is target ± tolerance)")
    if sense != "=" and g.has("tolerance"):
        raise SpecError(f"{g.key('tolerance')} only applies to sense '='; remove it or use sense '='")
    unit, rule = GOAL_METRICS[metric]
    default_scale = (abs(target) if target != 0 else 1.0) if rule == "target" else float(rule)
    scale = g.number("scale", default_scale, positive=True)
    if metric in ("modulation_depth", "leakage", "control_power_ratio", "bandwidth_nm",
                  "phase_drift_deg") and target < 0:
        raise SpecError(f"{g.key('target')} = {target:g}: {metric} cannot be negative; give a target >= 0")
    depth = g.number("depth", None, positive=True)
    if depth is not None and metric not in ("control_power_ratio", "bandwidth_nm"):
        raise SpecError(f"{g.key('depth')} only applies to control_power_ratio and bandwidth_nm goals")
    window = g.number("window_nm", None, positive=True)
    if window is not None and metric != "phase_drift_deg":
        raise SpecError(f"{g.key('window_nm')} only applies to phase_drift_deg goals")
    if metric == "bandwidth_nm" and sense == "<=":
        raise SpecError(f"{g.key('sense')}: a bandwidth goal is a floor; use '>='")
    return Goal(metric, sense, target, weight, scale, tol, depth, window)


def _bounds(goals):
    """(lower, upper) implied by a metric's goals."""
    lo, hi = -math.inf, math.inf
    for g in goals:
        if g.sense == ">=":
            lo = max(lo, g.target)
        elif g.sense == "<=":
            hi = min(hi, g.target)
        else:
            lo, hi = max(lo, g.target - g.tolerance), min(hi, g.target + g.tolerance)
    return lo, hi


def _check_goals(spec: Spec, where: str) -> None:
    from ._metrics import check_spec_feasible

    for metric in GOAL_METRICS:
        goals = spec.goal(metric)
        lo, hi = _bounds(goals)
        if lo > hi:
            raise SpecError(f"{where}.goals: the {metric} goals contradict each other (they need "
                            f"{metric} >= {lo:g} and <= {hi:g}); relax one of them")
    # The single-channel identity M = 4·sqrt(L): depth and leakage at the same ρ and wavelength.
    m_lo, m_hi = _bounds(spec.goal("modulation_depth"))
    l_lo, l_hi = _bounds(spec.goal("leakage"))
    if m_lo > 0 and math.isfinite(l_hi):
        verdict = check_spec_feasible(m_lo, max(l_hi, 0.0))
        if not verdict.feasible:
            raise SpecError(f"{where}.goals: no geometry can meet this spec: {verdict.message}")
    if l_lo > 0 and math.isfinite(m_hi) and 4.0 * math.sqrt(l_lo) > m_hi:
        raise SpecError(
            f"{where}.goals: no geometry can meet this spec: a leakage of at least {l_lo:g} means a "
            f"modulation depth M = 4*sqrt(L) >= {4 * math.sqrt(l_lo):.6g}, above the depth ceiling "
            f"{m_hi:g}. Lower the leakage floor to at most {(m_hi / 4) ** 2:.6g} or raise the ceiling.")
    depth = spec.depth_target()
    for i, g in enumerate(spec.goals):
        key = f"{where}.goals[{i}]"
        if g.metric in ("control_power_ratio", "bandwidth_nm") and g.depth is None and depth is None:
            raise SpecError(f"{key}: a {g.metric} goal needs the depth it refers to; add 'depth' to it or a "
                            f"modulation_depth goal with sense '>=' to the spec")
        if g.metric == "bandwidth_nm" or g.metric == "phase_drift_deg":
            width = g.target if g.metric == "bandwidth_nm" else _drift_window(spec, g)
            if width is None:
                raise SpecError(f"{key}: a phase_drift_deg goal needs 'window_nm' (or a bandwidth_nm goal)")
            lo, hi = spec.operating_nm - width / 2, spec.operating_nm + width / 2
            if lo < spec.band_start_nm - 1e-9 or hi > spec.band_stop_nm + 1e-9:
                raise SpecError(f"{key}: the window {lo:g}–{hi:g} nm around operating_nm does not fit in "
                                f"{where}.band [{spec.band_start_nm:g}, {spec.band_stop_nm:g}] nm; widen "
                                f"the band")
            step = (spec.band_stop_nm - spec.band_start_nm) / (spec.band_count - 1)
            if width > 0 and width / step < 2:
                raise SpecError(f"{key}: the {width:g} nm window holds fewer than 3 samples of {where}.band "
                                f"(spacing {step:g} nm); raise {where}.band.count to at least "
                                f"{math.ceil(2 * (spec.band_stop_nm - spec.band_start_nm) / width) + 1}")


def _drift_window(spec: Spec, goal: Goal):
    if goal.window_nm is not None:
        return goal.window_nm
    bw = [g.target for g in spec.goal("bandwidth_nm")]
    return max(bw) if bw else None


def drift_window_nm(spec: Spec, goal: Goal) -> float:
    """Full window width (nm) of a phase_drift_deg goal."""
    return float(_drift_window(spec, goal))


# -------------------------------------------------------------------------------------- fab deck
_FAB_KEYS = {
    "name": "a short name for the deck",
    "label": "where the values come from (e.g. 'typical values, common practice, no source')",
    "thickness_nm": "metal film thickness in nm: a number or a list of allowed values",
    "width_nm": "{min, max} rod width in nm",
    "length_nm": "{min, max} rod length in nm",
    "min_gap_nm": "smallest edge-to-edge gap in nm, inside the cell and across the periodic boundary",
    "max_aspect": "largest length/width ratio (>= 1)",
    "corner_radius_nm": "corner rounding radius in nm (>= 0; widths must be at least twice it)",
    "grid_nm": "placement grid (beam step) in nm: centres, lengths, widths and periods snap to it",
    "angle_step_deg": "rod angles snap to multiples of this, degrees",
    "period_nm": "{min, max} lattice period in nm",
    "tolerance": "fabrication error, 1σ of Gaussian errors: {label, width_nm: {global, local}, length_nm, "
                 "position_nm: {local}, angle_deg, thickness_nm, corner_radius_nm}",
}
_TOL_COMPONENTS = {"global": "1σ of the run-to-run error shared by every element (>= 0)",
                   "local": "1σ of the element-to-element error, independent per element (>= 0)"}
#: a perturbed size stays positive with overwhelming probability when its combined 1σ is at most this
#: fraction of the deck's smallest value (5σ from zero: a chance below 3e-7 per element)
TOLERANCE_MAX_RELATIVE = 0.2


def _parse_tolerance(r: _Reader, sizes: dict) -> FabTolerance:
    """The deck's ``tolerance`` block; ``sizes``: quantity -> the deck's smallest value of it (nm)."""
    known = {"label": "where the values come from (e.g. 'typical values, common practice, no source')"}
    known.update({q: f"{{global, local}} 1σ of the {m}, {u}"
                  for q, (m, u, _) in TOLERANCE_QUANTITIES.items()})
    t = r.sub("tolerance", known)
    out = []
    for q, (_, _, comps) in TOLERANCE_QUANTITIES.items():
        if not t.has(q):
            continue
        if q == "position_nm" and isinstance(t.raw(q), dict) and "global" in t.raw(q):
            raise SpecError(f"{t.key(q)}.global: a common shift of every element is a rigid translation of "
                            f"the periodic array, which leaves its zero-order response unchanged; give only "
                            f"{t.key(q)}.local")
        sub = t.sub(q, {c: _TOL_COMPONENTS[c] for c in comps})
        for c in comps:
            out.append((q, c, sub.number(c, 0.0, minimum=0.0)))
    tol = FabTolerance(label=t.text("label"), sigma=tuple(out))
    for q, smallest in sizes.items():
        if tol.combined(q) > TOLERANCE_MAX_RELATIVE * smallest:
            raise SpecError(f"{t.key(q)}: the combined 1σ sqrt(global² + local²) = {tol.combined(q):.4g} "
                            f"nm is more than {TOLERANCE_MAX_RELATIVE:g} × the deck's smallest value "
                            f"({smallest:g} nm), so sampled sizes could turn negative; give at most "
                            f"{TOLERANCE_MAX_RELATIVE * smallest:.4g} nm")
    return tol


def parse_fab(doc, where: str = "fab") -> FabDeck:
    """A ``FabDeck`` from a mapping; raises ``SpecError`` naming the key on any mistake."""
    r = _Reader(_to_plain(doc), where, _FAB_KEYS)
    th = r.raw("thickness_nm")
    ths = th if isinstance(th, list) else [th]
    if not ths or any(isinstance(t, bool) or not isinstance(t, (int, float)) or not t > 0 for t in ths):
        raise SpecError(f"{r.key('thickness_nm')} must be a positive number or a non-empty list of them, "
                        f"got {th!r}")
    w_lo, w_hi = _range(r, "width_nm")
    l_lo, l_hi = _range(r, "length_nm")
    p_lo, p_hi = _range(r, "period_nm")
    gap = r.number("min_gap_nm", positive=True)
    aspect = r.number("max_aspect", minimum=1.0)
    corner = r.number("corner_radius_nm", 0.0, minimum=0.0)
    grid = r.number("grid_nm", positive=True)
    astep = r.number("angle_step_deg", 1.0, positive=True)
    if w_lo < 2 * corner:
        raise SpecError(f"{r.key('width_nm')}.min ({w_lo:g} nm) is below twice {r.key('corner_radius_nm')} "
                        f"({2 * corner:g} nm): such a rod cannot have rounded corners; raise the minimum "
                        f"width")
    if l_hi < w_lo:
        raise SpecError(f"{r.key('length_nm')}.max ({l_hi:g}) is below {r.key('width_nm')}.min ({w_lo:g}); "
                        f"a rod's length must be at least its width")
    if l_lo / w_hi > aspect and l_lo / w_lo > aspect:
        raise SpecError(f"{r.key('max_aspect')} ({aspect:g}) is below the smallest possible aspect "
                        f"{l_lo / w_hi:g} = length_nm.min / width_nm.max")
    if grid > w_lo:
        raise SpecError(f"{r.key('grid_nm')} ({grid:g} nm) is coarser than the smallest width "
                        f"({w_lo:g} nm); use a finer grid")
    if p_lo <= l_lo:
        raise SpecError(f"{r.key('period_nm')}.min ({p_lo:g}) must exceed {r.key('length_nm')}.min "
                        f"({l_lo:g}) so that at least the shortest rod fits in a cell")
    tolerance = None
    if r.has("tolerance"):
        tolerance = _parse_tolerance(r, {"width_nm": w_lo, "length_nm": l_lo, "thickness_nm": min(ths)})
    return FabDeck(name=r.text("name", "fab"), label=r.text("label"), tolerance=tolerance,
                   thickness_nm=tuple(float(t) for t in ths),
                   width_min_nm=w_lo, width_max_nm=w_hi, length_min_nm=l_lo, length_max_nm=l_hi,
                   min_gap_nm=gap, max_aspect=aspect, corner_radius_nm=corner, grid_nm=grid,
                   angle_step_deg=astep, period_min_nm=p_lo, period_max_nm=p_hi)


# ------------------------------------------------------------------------------------------ cell
_CELL_KEYS = {
    "family": f"one of {', '.join(CELL_FAMILIES)}",
    "name": "a short name for the cell",
    "period_nm": "[px, py] start periods of the rectangular lattice, nm",
    "period_free": "true to let the lattice scale (px/py fixed), false to keep it",
    "thickness_nm": "film thickness, one of the fab deck's values (default: the deck's first)",
    "angle_range_deg": "[lo, hi] bounds of free rod angles, degrees",
    "rods": "free_rods: a list of {center, length, width, angle_deg, fixed}",
    "start": "named families: start values of the family's parameters",
    "free": "named families: which parameters are free (default: all)",
}
_ROD_KEYS = {
    "center": "[x, y] start centre, nm",
    "length": "start length, nm",
    "width": "start width, nm",
    "angle_deg": "start angle from +x, degrees",
    "fixed": f"fields kept fixed: a list from {', '.join(ROD_FIELDS)}",
}
#: named families: parameter -> (meaning, unit)
NAMED_PARAMETERS = {
    "lone_tilt": {
        "length": ("rod length", "nm"), "width": ("rod width", "nm"),
        "angle_deg": ("rod angle from +x", "deg"),
    },
    "pivot_pair": {
        "upright_length": ("length of the rod along y", "nm"),
        "swing_length": ("length of the tilted rod", "nm"),
        "swing_angle_deg": ("angle of the tilted rod from +x", "deg"),
        "separation_frac": ("centre-to-centre distance along x as a fraction of px", ""),
        "width": ("common width of both rods", "nm"),
    },
}


def parse_cell(doc, where: str = "cell") -> CellSpec:
    """A ``CellSpec`` from a mapping; raises ``SpecError`` naming the key on any mistake."""
    r = _Reader(_to_plain(doc), where, _CELL_KEYS)
    family = r.text("family", choices=CELL_FAMILIES)
    period = r.pair("period_nm", positive=True)
    thickness = r.number("thickness_nm", None, positive=True)
    arange = r.pair("angle_range_deg", [-90.0, 90.0])
    if not arange[0] < arange[1]:
        raise SpecError(f"{r.key('angle_range_deg')} must be [lo, hi] with lo < hi, got {list(arange)}")
    common = dict(family=family, name=r.text("name", family), period_nm=period,
                  period_free=r.flag("period_free", True), thickness_nm=thickness, angle_range_deg=arange)
    if family == "free_rods":
        if r.has("start") or r.has("free"):
            raise SpecError(f"{where}: 'start' and 'free' belong to the named families; a free_rods cell "
                            f"lists its rods under 'rods' (with 'fixed' per rod)")
        rods_raw = r.raw("rods")
        if not isinstance(rods_raw, list) or not rods_raw:
            raise SpecError(f"{r.key('rods')} must be a non-empty list of rods {{center, length, width, "
                            f"angle_deg}}")
        rods = []
        for i, rd in enumerate(rods_raw):
            rr = _Reader(rd, f"{r.key('rods')}[{i}]", _ROD_KEYS)
            fixed = rr.raw("fixed", [])
            if not isinstance(fixed, list) or any(f not in ROD_FIELDS for f in fixed):
                raise SpecError(f"{rr.key('fixed')} must be a list from {', '.join(ROD_FIELDS)}, "
                                f"got {fixed!r}")
            rods.append(RodStart(center=rr.pair("center"), length=rr.number("length", positive=True),
                                 width=rr.number("width", positive=True),
                                 angle_deg=rr.number("angle_deg", 0.0), fixed=frozenset(fixed)))
        return CellSpec(rods=tuple(rods), **common)
    if r.has("rods"):
        raise SpecError(f"{r.key('rods')} belongs to free_rods; family {family} takes 'start' and 'free'")
    names = NAMED_PARAMETERS[family]
    known = {k: f"{m} ({u})" if u else m for k, (m, u) in names.items()}
    start = r.sub("start", known)
    values = {k: start.number(k) for k in names}
    free = r.raw("free", list(names))
    if not isinstance(free, list) or any(f not in names for f in free):
        raise SpecError(f"{r.key('free')} must be a list from {', '.join(names)}, got {free!r}")
    return CellSpec(values=values, free=tuple(f for f in names if f in free), **common)


# --------------------------------------------------------------------------------- cross checks
def zero_order_period_limit(spec: Spec) -> float:
    """Largest period (nm) at which only the zero order propagates at normal incidence over the band.

    The first orders of a rectangular lattice appear at λ = n·p in a medium of index n; the rule is
    p < λ_min / max(n_substrate, n_superstrate).
    """
    return spec.band_start_nm / max(spec.substrate_index, spec.superstrate_index)


def check_setup(spec: Spec, fab: FabDeck, cell: CellSpec) -> None:
    """Checks that need spec, deck and cell together. Raises ``SpecError``."""
    if cell.thickness_nm is not None and not any(abs(cell.thickness_nm - t) < 1e-9 for t in fab.thickness_nm):
        raise SpecError(f"cell.thickness_nm = {cell.thickness_nm:g} is not a film of fab deck '{fab.name}'; "
                        f"use one of: {', '.join(f'{t:g}' for t in fab.thickness_nm)}")
    p_hi = fab.period_max_nm
    if not spec.allow_diffraction:
        limit = zero_order_period_limit(spec)
        p_hi = min(p_hi, limit)
        if p_hi <= fab.period_min_nm:
            raise SpecError(
                f"fab.period_nm.min ({fab.period_min_nm:g} nm) is not below the zero-order limit "
                f"{limit:.4g} nm = spec.band.start_nm / n ({spec.band_start_nm:g} / "
                f"{max(spec.substrate_index, spec.superstrate_index):g}); lower the deck's minimum period, "
                f"move the band to longer wavelengths, or set spec.allow_diffraction: true")
    px, py = cell.period_nm
    for k, p in (("px", px), ("py", py)):
        if not fab.period_min_nm <= p <= p_hi:
            raise SpecError(f"cell.period_nm {k} = {p:g} nm lies outside the allowed period range "
                            f"[{fab.period_min_nm:g}, {p_hi:.4g}] nm (fab.period_nm"
                            f"{' and the zero-order rule' if p_hi < fab.period_max_nm else ''})")
    lengths, widths = [], []
    if cell.family == "free_rods":
        for i, rd in enumerate(cell.rods):
            lengths.append((f"cell.rods[{i}].length", rd.length))
            widths.append((f"cell.rods[{i}].width", rd.width))
            if not cell.angle_range_deg[0] <= rd.angle_deg <= cell.angle_range_deg[1]:
                raise SpecError(f"cell.rods[{i}].angle_deg = {rd.angle_deg:g} lies outside "
                                f"cell.angle_range_deg {list(cell.angle_range_deg)}")
    else:
        v = cell.values
        for k in ("length", "upright_length", "swing_length"):
            if k in v:
                lengths.append((f"cell.start.{k}", v[k]))
        widths.append(("cell.start.width", v["width"]))
        for k in ("angle_deg", "swing_angle_deg"):
            if k in v and not cell.angle_range_deg[0] <= v[k] <= cell.angle_range_deg[1]:
                raise SpecError(f"cell.start.{k} = {v[k]:g} lies outside cell.angle_range_deg "
                                f"{list(cell.angle_range_deg)}")
        if "separation_frac" in v and not 0.05 <= v["separation_frac"] <= 0.95:
            raise SpecError(f"cell.start.separation_frac = {v['separation_frac']:g} must lie in [0.05, 0.95]")
    for key, val in lengths:
        if not fab.length_min_nm <= val <= fab.length_max_nm:
            raise SpecError(f"{key} = {val:g} nm lies outside fab.length_nm [{fab.length_min_nm:g}, "
                            f"{fab.length_max_nm:g}]")
    for key, val in widths:
        if not fab.width_min_nm <= val <= fab.width_max_nm:
            raise SpecError(f"{key} = {val:g} nm lies outside fab.width_nm [{fab.width_min_nm:g}, "
                            f"{fab.width_max_nm:g}]")

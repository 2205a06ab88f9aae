"""Is a design's performance a property of the design or of the model's discretisation?

``convergence_report`` re-simulates a design at several model resolutions (dipoles per rod) and under
several long-wavelength corrections, evaluates the caller's goals on every response, and flags each goal
whose met / not-met verdict is not the same everywhere. A flagged goal means the figure depends on how
finely the rods are resolved or on which correction the model uses: a model artefact, not a result. The
optimiser refuses to call a flagged design feasible unless the user overrides that explicitly.
"""

import jax
import jax.numpy as jnp
import numpy as np

from ._simulate import Incidence, ModelOptions, forward_function

DEFAULT_RESOLUTIONS = (1, 3, 5, 9, 13)
DEFAULT_CORRECTIONS = ("kelly", "moroz")


def model_label(dipoles_per_rod: int, correction: str) -> str:
    """Column label of one model variant, e.g. 'kelly/N=5'."""
    return f"{correction}/N={dipoles_per_rod}"


def convergence_report(design, wavelengths_nm, goal_fn, *, resolutions=DEFAULT_RESOLUTIONS,
                       corrections=DEFAULT_CORRECTIONS, incidence: Incidence | None = None,
                       period_scales=(1.0,), forward_cache: dict | None = None,
                       environment: str = "averaged") -> dict:
    """Evaluate goals across model resolutions and corrections and flag verdicts that flip.

    Args:
      design: ``Design`` to check.
      wavelengths_nm: (n_wl,) wavelengths the goals need, nm.
      goal_fn: maps a ``Response`` (NumPy arrays) to {goal label: (value, met)}.
      resolutions: dipoles per rod to try.
      corrections: long-wavelength corrections to try.
      incidence: incident plane wave.
      period_scales: passed to ``prepare`` (only matters with a ``forward_cache`` shared across designs).
      forward_cache: optional dict (dipoles, correction) -> jitted ``params -> Response`` to reuse across
        designs of the same structure; filled on a miss.
      environment: ``ModelOptions.environment`` of every model ("averaged" or "interface").

    Returns:
      A JSON-ready dict: ``models`` (labels in order), ``values`` {goal: {label: value}}, ``met``
      {goal: {label: bool}}, ``flagged`` (goals whose verdict differs between models), ``spread``
      {goal: max − min of the value}, and ``ok`` (no flag).
    """
    cache = {} if forward_cache is None else forward_cache
    incidence = Incidence() if incidence is None else incidence
    models, values, met = [], {}, {}
    for corr in corrections:
        for n in resolutions:
            key = (int(n), str(corr))
            if key not in cache:
                model = ModelOptions(int(n), str(corr), environment=environment)
                fn, _ = forward_function(design, wavelengths_nm, model=model, incidence=incidence,
                                         period_scales=period_scales)
                cache[key] = fn
            params = jax.tree_util.tree_map(lambda x: jnp.asarray(np.asarray(x, dtype=float)), design.params)
            resp = jax.tree_util.tree_map(np.asarray, cache[key](params))
            label = model_label(n, corr)
            models.append(label)
            for goal, (v, ok) in goal_fn(resp).items():
                values.setdefault(goal, {})[label] = float(v)
                met.setdefault(goal, {})[label] = bool(ok)
    flagged = [g for g in values if len(set(met[g].values())) > 1]
    spread = {}
    for g, vals in values.items():
        finite = [v for v in vals.values() if np.isfinite(v)]
        spread[g] = float(max(finite) - min(finite)) if finite else float("nan")
    return {"models": models, "values": values, "met": met, "flagged": flagged, "spread": spread,
            "ok": not flagged}


def format_report(report: dict) -> str:
    """A plain-text table of a convergence report (goals as rows, models as columns)."""
    models = report["models"]
    width = max([len("goal")] + [len(g) for g in report["values"]]) + 2
    head = "goal".ljust(width) + "".join(m.rjust(14) for m in models) + "  verdict"
    lines = [head]
    for g, vals in report["values"].items():
        cells = "".join((f"{vals[m]:.4g}" + ("" if report["met"][g][m] else "*")).rjust(14) for m in models)
        verdict = "FLIPS" if g in report["flagged"] else "stable"
        lines.append(g.ljust(width) + cells + "  " + verdict)
    lines.append("(* = goal not met under that model)")
    return "\n".join(lines)

"""A trade-off run's results: the front (non-dominated feasible points), its quality, and the files.

Quality, stated in ``front.json``:

* hypervolume of the front (``_pareto.hypervolume``, exact) in the objectives' own units, maximised
  objectives negated, against the reference point (``front.reference``, or by default the worst front
  value of each objective plus ``front.reference_offset`` times the front's range in it; an objective that
  does not vary on the front gets ``reference_offset`` times max(|value|, 1)); also normalised by the box
  between the front's ideal point and the reference (1 = a single point at the ideal);
* Schott's spacing (``_pareto.spacing``) with each objective divided by its range on the front;
* the knee point (``_pareto.knee``).

Files (all written atomically): ``front.csv`` (one row per front point), ``front.json`` (objectives,
reference, quality, every front point with its objective values, parameters and the path of its
``design.json``, and every other candidate with the reason it is not on the front), ``front.png``
(2 objectives: the front; 3–4: a pairwise grid), ``points/NN/design.json`` for each front point (NN the
candidate number; ``lattice_point`` is the weight vector's index in the lattice).
"""

import io
import json
import pathlib

import numpy as np

from ._atomic import atomic_write_text
from ._optimize import misses
from ._optimize_io import _clean, _plt, _save
from ._pareto import hypervolume, knee, non_dominated, normalise, spacing
from ._spectra_io import SAFETY_NOTE
from ._tradeoff import oriented


def select_front(ts, cands: list[dict]) -> dict:
    """{front: candidate indices, status: per candidate, knee: index into front or None, F: (k, m)}."""
    status = []
    for c in cands:
        if c.get("objectives") is None:
            status.append("invalid geometry")
        elif not c["feasible"]:
            status.append("infeasible: " + "; ".join(misses(c)))
        elif not all(np.isfinite(list(c["objectives"].values()))):
            status.append("non-finite objective")
        else:
            status.append("")
    ok = [i for i, s in enumerate(status) if not s]
    F = oriented(ts, [[cands[i]["objectives"][n] for n in ts.names] for i in ok]) if ok else np.zeros(
        (0, len(ts.names)))
    keep = non_dominated(F) if ok else np.zeros(0, bool)
    front = [i for i, k in zip(ok, keep, strict=True) if k]
    for i, k in zip(ok, keep, strict=True):
        if not k:
            status[i] = "dominated (or a duplicate) by another feasible point"
    Ff = F[keep] if ok else F
    return {"front": front, "status": status, "F": Ff, "knee": knee(Ff) if len(front) else None}


def reference_point(ts, F: np.ndarray) -> np.ndarray:
    """Oriented reference point: ``front.reference`` or the automatic rule (module docstring)."""
    fr = ts.front
    if fr.reference is not None:
        return oriented(ts, [fr.reference])[0]
    worst, best = F.max(axis=0), F.min(axis=0)
    rng = worst - best
    pad = np.where(rng > 0, fr.reference_offset * rng, fr.reference_offset * np.maximum(np.abs(worst), 1.0))
    return worst + pad


def quality(ts, F: np.ndarray) -> dict:
    if len(F) == 0:
        return {"points": 0, "hypervolume": None, "hypervolume_normalised": None, "spacing": None,
                "reference": None}
    ref = reference_point(ts, F)
    hv = hypervolume(F, ref)
    box = np.prod(ref - F.min(axis=0))
    _, _, span = normalise(F)
    signs = np.array([o.sign for o in ts.objectives])
    return {"points": int(len(F)), "hypervolume": hv, "hypervolume_normalised": hv / box if box > 0 else None,
            "spacing": spacing(F, scale=span) if len(F) > 1 else None,
            "reference": dict(zip(ts.names, (float(x) for x in ref * signs), strict=True)),
            "reference_rule": "front.reference" if ts.front.reference is not None else
            f"worst front value + {ts.front.reference_offset:g} x front range per objective",
            "hypervolume_units": " x ".join(o.unit or "1" for o in ts.objectives),
            "hypervolume_orientation": "maximised objectives negated; all minimised against the reference"}


def write_front(ts, state: dict, cands: list[dict], out_dir, *, meta: dict, plot: bool = True) -> dict:
    """Write designs, front.csv, front.json and front.png; returns {kind: path} and the summary."""
    out = pathlib.Path(out_dir)
    sel = select_front(ts, cands)
    q = quality(ts, sel["F"])
    names = ts.names
    pnames = list(ts.base.family.names)
    rows, points = [], []
    for rank, i in enumerate(sel["front"]):
        c = cands[i]
        rel = pathlib.Path("points") / f"{c['point']:02d}" / "design.json"
        c["design"].to_json(out / rel)
        is_knee = sel["knee"] == rank
        points.append({"point": c["point"], "lattice_point": c["lattice_point"], "knee": is_knee,
                       "weight": c["weight"],
                       "objectives": c["objectives"], "per_model": c["per_model"],
                       "parameters": c["parameters"], "design_json": str(rel), "constraints": c["goals"],
                       "convergence_flagged": c.get("flagged", False)})
        rows.append([c["point"], c["lattice_point"], int(is_knee)] + [c["objectives"][n] for n in names]
                    + c["weight"] + [c["parameters"][p] for p in pnames] + [str(rel)])
    buf = io.StringIO()
    head = ["point", "lattice_point", "knee"] + list(names) + [f"weight_{n}" for n in names] + pnames
    buf.write(",".join(head + ["design_json"]) + "\n")
    for r in rows:
        buf.write(",".join(f"{v:.10g}" if isinstance(v, float) else str(v) for v in r) + "\n")
    atomic_write_text(out / "front.csv", buf.getvalue())
    others = [{"point": c["point"], "lattice_point": c["lattice_point"], "weight": c["weight"],
               "objectives": c.get("objectives"),
               "status": sel["status"][i]} for i, c in enumerate(cands) if i not in sel["front"]]
    doc = {"objectives": [{"name": o.name, "sense": o.sense, "unit": o.unit, "depth": o.depth}
                          for o in ts.objectives],
           "constraints": [g.describe() for g in ts.base.spec.goals],
           "scalarisation": {"kind": "augmented Tchebycheff", "augmentation": ts.front.augmentation,
                             "divisions": ts.front.divisions, "z_star": state["z"].tolist(),
                             "span": state["span"].tolist()},
           "quality": q, "knee_point": points[sel["knee"]]["point"] if points else None,
           "front": points, "other_points": others, "phases": state["phases"],
           "evaluations": int(state["evaluations"]), "run": meta, "safety": SAFETY_NOTE}
    atomic_write_text(out / "front.json", json.dumps(_clean(doc), indent=2) + "\n")
    paths = {"front_csv": out / "front.csv", "front_json": out / "front.json"}
    if plot:
        sel["quality"] = q["hypervolume"]
        paths["front_png"] = plot_front(ts, cands, sel, out / "front.png")
    return {"paths": paths, "quality": q, "front": points, "others": others}


def plot_front(ts, cands, sel, path):
    """2 objectives: front, other feasible and infeasible points, knee; 3–4: every pair in a grid."""
    plt = _plt()
    names, m = ts.names, len(ts.names)
    val = {i: [c["objectives"][n] for n in names] for i, c in enumerate(cands) if c.get("objectives")}
    front = np.array([val[i] for i in sel["front"]]) if sel["front"] else np.zeros((0, m))
    feas = np.array([val[i] for i in val if i not in sel["front"] and not sel["status"][i].startswith("inf")]
                    ).reshape(-1, m)
    bad = np.array([val[i] for i in val if sel["status"][i].startswith("inf")]).reshape(-1, m)
    if m == 2:
        fig, axes = plt.subplots(figsize=(6.2, 4.8), constrained_layout=True)
        axes = {(0, 1): axes}
    else:
        fig, grid = plt.subplots(m - 1, m - 1, figsize=(3.4 * (m - 1), 3.1 * (m - 1)),
                                 constrained_layout=True, squeeze=False)
        axes = {}
        for i in range(m - 1):
            for j in range(m - 1):
                if j + 1 > i:
                    axes[(i, j + 1)] = grid[j][i]
                else:
                    grid[j][i].axis("off")
    for (i, j), ax in axes.items():
        if len(bad):
            ax.scatter(bad[:, i], bad[:, j], s=14, marker="x", color="0.65", label="infeasible")
        if len(feas):
            ax.scatter(feas[:, i], feas[:, j], s=16, facecolors="none", edgecolors="0.4", label="dominated")
        if len(front):
            order = np.argsort(front[:, i])
            style = "-o" if m == 2 else "o"  # a projection of a 3-4 objective front is no curve
            ax.plot(front[order, i], front[order, j], style, color="tab:blue", ms=5, lw=1, label="front")
            if sel["knee"] is not None:
                k = front[sel["knee"]]
                ax.scatter([k[i]], [k[j]], s=140, marker="D", facecolors="none", edgecolors="tab:red", lw=1.6,
                           label="knee", zorder=5)
        shown = np.concatenate([front, feas]) if len(front) + len(feas) else bad
        if len(shown):  # frame the feasible points; far-off infeasible ones may fall outside
            for k, setlim in ((i, ax.set_xlim), (j, ax.set_ylim)):
                lo, hi = float(np.min(shown[:, k])), float(np.max(shown[:, k]))
                pad = 0.08 * (hi - lo) if hi > lo else 0.05 * max(abs(hi), 1.0)
                setlim(lo - pad, hi + pad)
        ax.set_xlabel(ts.objectives[i].label(), fontsize=8)
        ax.set_ylabel(ts.objectives[j].label(), fontsize=8)
        ax.tick_params(labelsize=7)
    first = next(iter(axes.values()))
    first.legend(fontsize=7)
    q = sel.get("quality")
    title = f"{ts.base.spec.name}: {len(front)} front point(s)"
    if q:
        title += f", hypervolume {q:.4g}"
    fig.suptitle(title, fontsize=10)
    return _save(fig, path)

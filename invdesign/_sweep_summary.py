"""Gathering a Hydra multirun sweep into one table and one plot.

A sweep folder (``runs/tradeoff-sweep/<timestamp>`` or ``runs/optimize-sweep/<timestamp>``) holds one
sub-folder per job with Hydra's ``.hydra/overrides.yaml`` and, once the job has finished, its result
(``front.json`` for ``tradeoff``, ``metrics.json`` for ``optimize``; both written atomically, so a file that
exists is complete). Jobs without a result (still running, killed, failed) are listed as ``unfinished``;
every finished job is kept, so a killed sweep loses no finished point.

Columns: ``job``, every override key whose value differs between jobs, ``status``, then per kind

* tradeoff: ``points``, ``hypervolume``, ``hypervolume_normalised``, ``spacing``, and for every objective
  its best value on the front (``best_<name>``) and at the knee point (``knee_<name>``). Hypervolumes of
  different jobs are against each job's own reference point (front.json states it), so compare the
  ``best_`` and ``knee_`` columns across jobs rather than the hypervolume;
* optimize: ``feasible`` and the achieved worst-case value of every goal (``<goal label>``).

The plot draws every numeric column against the swept key when exactly one key varies and is numeric,
else against the job number.
"""

import io
import json
import math
import pathlib

import numpy as np

from ._atomic import atomic_write_text
from ._errors import InvdesignError


def _overrides(job: pathlib.Path) -> dict:
    from omegaconf import OmegaConf

    path = job / ".hydra" / "overrides.yaml"
    items = OmegaConf.to_container(OmegaConf.load(path)) if path.is_file() else []
    out = {}
    for item in items or []:
        key, _, value = str(item).partition("=")
        out[key.lstrip("+~")] = value
    return out


def _jobs(sweep: pathlib.Path) -> list[pathlib.Path]:
    jobs = [p for p in sweep.iterdir() if p.is_dir() and (p / ".hydra").is_dir()]
    return sorted(jobs, key=lambda p: (not p.name.isdigit(), int(p.name) if p.name.isdigit() else 0, p.name))


def _number(v):
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return float(v)
    try:
        return float(v)
    except (TypeError, ValueError):
        return None


def job_row(job: pathlib.Path) -> dict:
    """One row: status and the headline numbers of one job folder."""
    row = {"job": job.name}
    if (job / "front.json").is_file():
        doc = json.loads((job / "front.json").read_text())
        q = doc["quality"]
        row.update({"status": "tradeoff", "points": q["points"], "hypervolume": q["hypervolume"],
                    "hypervolume_normalised": q["hypervolume_normalised"], "spacing": q["spacing"]})
        knee = next((p for p in doc["front"] if p["knee"]), None)
        for o in doc["objectives"]:
            vals = [p["objectives"][o["name"]] for p in doc["front"]]
            best = (min(vals) if o["sense"] == "min" else max(vals)) if vals else None
            row[f"best_{o['name']}"] = best
            row[f"knee_{o['name']}"] = knee["objectives"][o["name"]] if knee else None
    elif (job / "metrics.json").is_file():
        doc = json.loads((job / "metrics.json").read_text())
        row.update({"status": "optimize", "feasible": bool(doc["feasible"])})
        for label, g in doc.get("goals", {}).items():
            row[label] = g.get("achieved")
    else:
        row["status"] = "unfinished"
    return row


def gather(sweep) -> dict:
    """{rows, columns, varying}: the table of a sweep folder (see the module docstring)."""
    sweep = pathlib.Path(sweep).expanduser()
    if not sweep.is_dir():
        raise InvdesignError(f"sweep={sweep}: not a folder; give the folder of a multirun sweep, e.g. "
                             f"runs/tradeoff-sweep/<timestamp>")
    jobs = _jobs(sweep)
    if not jobs:
        raise InvdesignError(f"sweep={sweep}: no job folders (sub-folders with a .hydra/ folder) in it; give "
                             f"the folder Hydra printed for a -m sweep")
    overrides = {j.name: _overrides(j) for j in jobs}
    keys = list(dict.fromkeys(k for o in overrides.values() for k in o))
    varying = [k for k in keys if len({o.get(k) for o in overrides.values()}) > 1]
    rows = []
    for j in jobs:
        row = {"job": j.name, **{k: overrides[j.name].get(k) for k in varying}}
        row.update(job_row(j))
        rows.append(row)
    columns = list(dict.fromkeys(c for r in rows for c in r))
    return {"rows": rows, "columns": columns, "varying": varying, "sweep": str(sweep)}


def write_summary(table: dict, out_dir, *, plot: bool = True) -> dict:
    out = pathlib.Path(out_dir)
    buf = io.StringIO()
    cols = table["columns"]
    buf.write(",".join(cols) + "\n")
    for r in table["rows"]:
        cells = []
        for c in cols:
            v = r.get(c)
            cells.append("" if v is None else f"{v:.10g}" if isinstance(v, float) else str(v))
        buf.write(",".join(cells) + "\n")
    atomic_write_text(out / "summary.csv", buf.getvalue())
    atomic_write_text(out / "summary.json", json.dumps(table, indent=2, default=str) + "\n")
    paths = {"summary_csv": out / "summary.csv", "summary_json": out / "summary.json"}
    if plot:
        p = plot_summary(table, out / "summary.png")
        if p is not None:
            paths["summary_png"] = p
    return paths


def plot_summary(table: dict, path):
    """Every numeric result column against the swept key (or the job number); None if nothing to plot."""
    from ._optimize_io import _plt, _save

    rows = [r for r in table["rows"] if r["status"] != "unfinished"]
    skip = {"job", "status", *table["varying"]}
    numeric = [c for c in table["columns"] if c not in skip
               and any(_number(r.get(c)) is not None for r in rows)]
    if not rows or not numeric:
        return None
    xs_key = table["varying"][0] if len(table["varying"]) == 1 else None
    xs = [_number(r.get(xs_key)) for r in rows] if xs_key else [None]
    if xs_key is None or any(x is None for x in xs):
        xs, xs_key, labels = list(range(len(rows))), None, [r["job"] for r in rows]
    plt = _plt()
    ncol = min(3, len(numeric))
    nrow = math.ceil(len(numeric) / ncol)
    fig, axes = plt.subplots(nrow, ncol, figsize=(4.2 * ncol, 3.2 * nrow), constrained_layout=True,
                             squeeze=False)
    for ax, c in zip(axes.ravel(), numeric, strict=False):
        ys = [_number(r.get(c)) for r in rows]
        pts = sorted((x, y) for x, y in zip(xs, ys, strict=True) if y is not None and math.isfinite(y))
        if pts:
            ax.plot([p[0] for p in pts], [p[1] for p in pts], "-o", ms=4)
        ax.set_title(c, fontsize=9)
        ax.set_xlabel(xs_key or "job", fontsize=8)
        if xs_key is None:
            ax.set_xticks(list(range(len(rows))), labels, fontsize=7)
        ax.tick_params(labelsize=7)
    for ax in axes.ravel()[len(numeric):]:
        ax.axis("off")
    fig.suptitle(f"sweep {pathlib.Path(table['sweep']).name}: {len(rows)} finished job(s) of "
                 f"{len(table['rows'])}", fontsize=10)
    return _save(fig, path)


def numeric_column(table: dict, column: str) -> np.ndarray:
    """A column as floats (nan where missing), for scripts and tests."""
    return np.array([_number(r.get(column)) if _number(r.get(column)) is not None else np.nan
                     for r in table["rows"]])

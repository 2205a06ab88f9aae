"""Measured optical constants from a user's CSV file (for example their own ellipsometry results).

File layout (UTF-8 text, comma-separated):

    # optional comment lines start with '#'; blank lines are ignored
    wavelength_nm,n,k
    400,1.47,0.0
    500,1.46,0.0

The header must name exactly the three columns ``wavelength_nm``, ``n`` and ``k`` (any order,
case-insensitive). Wavelengths are vacuum wavelengths in nm, > 0 and distinct; rows may come in any
order and are sorted. n > 0 and k ≥ 0 (passive medium, exp(-iωt) convention). At least two rows.

n and k are interpolated linearly in wavelength (``jnp.interp``) and ε = (n + ik)². Outside the data
range ``jnp.interp`` would hold the end values constant, so callers must call ``check_range`` first; the
valid range is exactly [first wavelength, last wavelength].
"""

import csv
import dataclasses
import math
import pathlib

import jax.numpy as jnp
import numpy as np

from .. import _jaxsetup  # noqa: F401
from .._errors import MaterialError
from .base import AbstractMaterial

#: required header columns
COLUMNS = ("wavelength_nm", "n", "k")
#: at most this many problems are listed in one error message
_MAX_LISTED = 20


def _fail(path, problems):
    shown = problems[:_MAX_LISTED]
    more = len(problems) - len(shown)
    tail = f"\n  ... and {more} more" if more > 0 else ""
    raise MaterialError(
        f"optical-constant table '{path}' has {len(problems)} problem(s):\n  "
        + "\n  ".join(shown)
        + tail
        + f"\nexpected a CSV with header '{','.join(COLUMNS)}', wavelengths in nm (> 0, distinct), "
        "n > 0 and k >= 0, at least two data rows"
    )


def read_nk_csv(path) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Read and validate an n, k table.

    Args:
      path: path of the CSV file (str or pathlib.Path).

    Returns:
      (wavelength_nm, n, k): float64 numpy arrays of shape (N,), N ≥ 2, sorted by wavelength.

    Raises:
      MaterialError naming the file and, for each problem, the line number and column.
    """
    path = pathlib.Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise MaterialError(f"optical-constant table '{path}' does not exist; check the path (relative "
                            f"paths in a design file are taken from the design file's folder)") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise MaterialError(f"optical-constant table '{path}' cannot be read as UTF-8 text: {exc}") from None

    rows = []  # (line number, list of cells)
    for lineno, cells in enumerate(csv.reader(text.splitlines()), start=1):
        if not cells or all(not c.strip() for c in cells) or cells[0].lstrip().startswith("#"):
            continue
        rows.append((lineno, [c.strip() for c in cells]))
    if not rows:
        _fail(path, ["the file has no header and no data"])

    head_line, header = rows[0]
    names = [h.lower() for h in header]
    problems = []
    missing = [c for c in COLUMNS if c not in names]
    extra = [h for h in header if h.lower() not in COLUMNS]
    dupes = sorted({h for h in names if names.count(h) > 1})
    if missing:
        problems.append(f"line {head_line}: header lacks column(s) {', '.join(missing)}")
    if extra:
        problems.append(f"line {head_line}: header has unknown column(s) {', '.join(extra)}")
    if dupes:
        problems.append(f"line {head_line}: header repeats column(s) {', '.join(dupes)}")
    if problems:
        _fail(path, problems)
    col = {c: names.index(c) for c in COLUMNS}

    data = []
    for lineno, cells in rows[1:]:
        if len(cells) != len(header):
            problems.append(f"line {lineno}: expected {len(header)} values, found {len(cells)}")
            continue
        values = {}
        for c in COLUMNS:
            raw = cells[col[c]]
            try:
                v = float(raw)
            except ValueError:
                problems.append(f"line {lineno}, column {c}: '{raw}' is not a number")
                continue
            if not math.isfinite(v):
                problems.append(f"line {lineno}, column {c}: value must be finite, got '{raw}'")
                continue
            if c == "wavelength_nm" and v <= 0:
                problems.append(f"line {lineno}, column {c}: wavelength must be > 0 nm, got {v:g}")
            elif c == "n" and v <= 0:
                problems.append(f"line {lineno}, column {c}: refractive index must be > 0, got {v:g}")
            elif c == "k" and v < 0:
                problems.append(f"line {lineno}, column {c}: extinction coefficient must be >= 0 "
                                f"(passive medium), got {v:g}")
            values[c] = v
        if len(values) == len(COLUMNS):
            data.append((lineno, values["wavelength_nm"], values["n"], values["k"]))

    seen = {}
    for lineno, wl, _, _ in data:
        if wl in seen:
            problems.append(f"line {lineno}, column wavelength_nm: wavelength {wl:g} nm repeats line "
                            f"{seen[wl]}")
        else:
            seen[wl] = lineno
    if not problems and len(data) < 2:
        problems.append(f"only {len(data)} data row(s); at least 2 are needed to interpolate")
    if problems:
        _fail(path, problems)

    arr = np.array([d[1:] for d in data], dtype=np.float64)
    arr = arr[np.argsort(arr[:, 0], kind="stable")]
    cols = tuple(arr[:, j].copy() for j in range(3))
    for c in cols:
        c.flags.writeable = False  # the material is immutable
    return cols


@dataclasses.dataclass(frozen=True, eq=False, init=False)
class TabulatedNK(AbstractMaterial):
    """Material defined by a table of n and k against wavelength, interpolated linearly.

    Args:
      path: CSV file (see the module docstring for the layout).
      name: label used in error messages; defaults to the file name.

    Attributes:
      wavelength_nm, n, k: float64 numpy arrays of shape (N,), sorted by wavelength.
    """

    path: pathlib.Path
    name: str
    wavelength_nm: np.ndarray = dataclasses.field(repr=False)
    n: np.ndarray = dataclasses.field(repr=False)
    k: np.ndarray = dataclasses.field(repr=False)

    def __init__(self, path, name=None):
        p = pathlib.Path(path)
        wl, n, k = read_nk_csv(p)
        object.__setattr__(self, "path", p)
        object.__setattr__(self, "name", str(name) if name is not None else p.name)
        object.__setattr__(self, "wavelength_nm", wl)
        object.__setattr__(self, "n", n)
        object.__setattr__(self, "k", k)

    def permittivity(self, wavelength_nm):
        """ε = (n + ik)², complex128, same shape as ``wavelength_nm`` (nm, float64).

        Linear interpolation of n and k; not range-checked (call ``check_range`` first).
        """
        wl = jnp.asarray(wavelength_nm, dtype=jnp.float64)
        xp = jnp.asarray(self.wavelength_nm)
        n = jnp.interp(wl, xp, jnp.asarray(self.n))
        k = jnp.interp(wl, xp, jnp.asarray(self.k))
        return (n + 1j * k) ** 2

    def valid_range_nm(self) -> tuple[float, float]:
        """[shortest, longest] tabulated wavelength in nm."""
        return (float(self.wavelength_nm[0]), float(self.wavelength_nm[-1]))

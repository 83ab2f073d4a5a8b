"""The tables of one finished scan, read for plotting, and what each model's axes mean.

Units as in the tables: ``T``, ``mu`` in the energy unit E of the config; for a sourced ``emd``
model E is the source's own scale ``J^(1/(4-Delta))`` (times ``energy_scale``). Reduced ratios
(``s_hat = s/T^(d-1)``, ``P_hat = P/T^d``, ``chi2_hat = chi2/T^(d-2)``, ``trace_anomaly``, ``cs2``)
are pure numbers. The condensate ``<O>`` (``extra.condensate``) has dimension ``E^Delta``.

The figures draw whatever the tables hold. Numeric columns are read as floats (a value that is not
a number reads as NaN); a value is drawn only when it is *drawable* (:func:`drawable`: finite and
at most ``DRAW_MAX`` in magnitude, and on a logarithmic axis at least ``1/DRAW_MAX``), others are
counted and named in the figure's caption. A phase table that is missing or unreadable reads as
empty, with a note in :attr:`ScanTables.notes`.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow.parquet as pq

from ...errors import InputError
from ...kinds import kind_class
from ...validate import finite_or

TABLES = ("points", "phases", "transitions", "critical_points", "families", "isentropes")

#: largest magnitude drawn: matplotlib widens an axis by a margin, and beyond about 1e300 (or 300
#: decades on a logarithmic axis) that margin overflows
DRAW_MAX = 1e250

#: columns read as floats wherever they occur
NUMERIC = ("T", "mu", "s", "rho", "epsilon", "P", "Omega", "chi2", "cs2", "P_check", "P_mismatch",
           "trace_anomaly", "s_hat", "rho_hat", "P_hat", "chi2_hat", "error_estimate", "residual", "accept_error",
           "mu_over_T", "T_err", "mu_err", "latent_heat", "rho_jump", "s_high", "s_low", "omega_gap",
           "branch", "d", "dominant_branch", "wall_time", "chi3", "chi4", "chi3_err", "chi4_err", "kurtosis_ratio",
           "sigma", "eta_over_s", "D_charge")


@dataclass
class ScanTables:
    """The four tables of a scan as DataFrames, the run metadata of the points table, and notes on
    tables that could not be read (they read as empty)."""

    root: Path
    points: pd.DataFrame
    phases: pd.DataFrame
    transitions: pd.DataFrame
    critical: pd.DataFrame
    meta: dict
    notes: list = field(default_factory=list)
    families: pd.DataFrame = field(default_factory=pd.DataFrame)
    isentropes: pd.DataFrame = field(default_factory=pd.DataFrame)

    @property
    def scan(self) -> str:
        return str(self.meta.get("scan") or self.root.name)

    @property
    def code_hash(self) -> str:
        return str(self.meta.get("code_hash", "unknown"))

    @property
    def package_version(self) -> str:
        return str(self.meta.get("package_version", "unknown"))

    def _blocks(self) -> list:
        cfg = self.meta.get("config") if isinstance(self.meta, dict) else None
        blocks = cfg.get("models") if isinstance(cfg, dict) else None
        return [b for b in blocks if isinstance(b, dict)] if isinstance(blocks, list) else []

    def models(self) -> list[tuple[str, str]]:
        """``(model_id, kind)`` in config order (from the metadata), else in table order."""
        blocks = [b for b in self._blocks() if isinstance(b.get("id"), str) and isinstance(b.get("kind"), str)]
        if blocks:
            return [(m["id"], m["kind"]) for i, b in enumerate(blocks) for m, _ in self._members(b, i)]
        if not {"model_id", "kind"} <= set(self.points.columns):
            return []
        pairs = self.points[["model_id", "kind"]].dropna().astype(str).drop_duplicates()
        return [tuple(r) for r in pairs.itertuples(index=False)]

    def family_ids(self) -> list[str]:
        """Ids of the config's families (blocks with ``vary``), in config order."""
        return [b["id"] for b in self._blocks() if isinstance(b.get("id"), str) and "vary" in b]

    @staticmethod
    def _members(block: dict, i: int) -> list:
        """The model blocks a config block stands for (a family's members; see scan/members.py)."""
        from ..members import expand

        try:
            return expand(block, f"models[{i}]")
        except InputError:
            return [(block, None)]

    def block(self, model_id: str) -> dict:
        """The model's config block (a family member's own block; empty if the metadata has none)."""
        for i, b in enumerate(self._blocks()):
            for m, _ in self._members(b, i):
                if m.get("id") == model_id:
                    return m
        return {}

    def rows(self, name: str, model_id: str) -> pd.DataFrame:
        """The rows of one model in table ``name`` (points, phases, transitions, critical); empty
        when the table has no such rows or no ``model_id`` column."""
        t = getattr(self, name)
        if not len(t) or "model_id" not in t.columns:
            return t.iloc[0:0]
        return t[t["model_id"] == model_id]


def _numeric(df: pd.DataFrame) -> pd.DataFrame:
    """Numeric columns as floats (anything that is not a number becomes NaN)."""
    for c in NUMERIC:
        if c in df.columns and not pd.api.types.is_float_dtype(df[c]):
            df[c] = pd.to_numeric(df[c], errors="coerce").astype(float)
    return df


def _read(path: Path, notes: list) -> pd.DataFrame:
    if not path.exists():
        return pd.DataFrame()
    try:
        return _numeric(pq.read_table(path).to_pandas())
    except Exception as exc:  # noqa: BLE001 - any reader failure: the table reads as empty
        notes.append(f"{path.name} could not be read ({type(exc).__name__}) and is drawn as empty")
        return pd.DataFrame()


def load_scan(results_dir) -> ScanTables:
    """Read ``points``, ``phases``, ``transitions`` and ``critical_points`` of ``results_dir``.

    The points table must exist (FileNotFoundError) and be readable Parquet (InputError naming
    ``RESULTS_DIR``); a missing or unreadable phase table reads as empty (no shading, no lines).
    """
    root = Path(results_dir)
    points_file = root / "points.parquet"
    if not points_file.exists():
        raise FileNotFoundError(f"{points_file}: no points table (run the scan first)")
    try:
        table = pq.read_table(points_file)
    except Exception as exc:  # noqa: BLE001 - any reader failure is a bad input file
        raise InputError("RESULTS_DIR", str(results_dir),
                         f"points.parquet cannot be read as Parquet ({type(exc).__name__})") from None
    raw = table.schema.metadata or {}
    try:
        meta = json.loads(raw[b"holoscan"]) if b"holoscan" in raw else {}
    except ValueError:
        meta = {}
    meta = meta if isinstance(meta, dict) else {}
    notes: list = []
    points = _numeric(table.to_pandas())
    return ScanTables(root, points, _read(root / "phases.parquet", notes),
                      _read(root / "transitions.parquet", notes), _read(root / "critical_points.parquet", notes),
                      meta, notes, _read(root / "families.parquet", notes), _read(root / "isentropes.parquet", notes))


def drawable(values, log: bool = False) -> np.ndarray:
    """Boolean mask of the values a figure draws: finite, ``|x| <= DRAW_MAX``, and on a logarithmic
    axis ``x >= 1/DRAW_MAX``."""
    x = pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(float)
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(x) & (np.abs(x) <= DRAW_MAX)
        if log:
            ok &= x >= 1.0 / DRAW_MAX
    return ok


def count_text(n: int, what: str) -> str:
    """``'1 row'``, ``'3 rows'``: a count with its noun."""
    return f"{n} {what}" + ("" if n == 1 else "s")


def extra_field(series: pd.Series, key: str) -> pd.Series:
    """One key of the JSON ``extra`` column as floats (NaN where absent)."""
    def get(s):
        try:
            v = json.loads(s).get(key) if s else None
        except (TypeError, ValueError):
            v = None
        return float(v) if isinstance(v, (int, float)) else math.nan
    return series.map(get).astype(float)


@dataclass(frozen=True)
class ModelInfo:
    """What the axes of one model mean.

    ``conformal``: no scale of its own (``rn``, ``charged-scalar``, unsourced ``emd``), so reduced
    quantities depend on ``mu/T`` only. ``unit``: the name of E in labels. ``delta``: the condensate's
    dimension (charged-scalar), else None.
    """

    model_id: str
    kind: str
    d: int
    conformal: bool
    unit: str
    unit_note: str
    delta: float | None
    unit_plain: str = ""  # unit_note in plain text, for captions

    @property
    def title(self) -> str:
        return f"{self.model_id} ({self.kind}, d = {self.d})"


def model_info(tables: ScanTables, model_id: str, kind: str) -> ModelInfo:
    block = tables.block(model_id)
    rows = tables.rows("points", model_id)
    ds = rows["d"].dropna() if "d" in rows.columns else []
    ds = [int(x) for x in ds if 1 <= x <= 64]
    d = ds[0] if ds else int(finite_or(block.get("d"), 4))
    cls = kind_class(kind)
    facts = cls.unit_facts(block, d) if cls is not None else {"conformal": True, "delta": None}
    sourced, delta = not facts["conformal"], facts["delta"]
    if sourced:
        scale = finite_or(block.get("energy_scale"), 1.0)
        unit = "source units"
        note = (r"T, $\mu$ in units of the source scale $J^{1/(4-\Delta)}$"
                + ("" if scale == 1.0 else f" (= {scale:g} E)"))
        plain = "T, mu in units of the source scale J^(1/(4-Delta))" + ("" if scale == 1.0 else f" (= {scale:g} E)")
    else:
        unit = "E"
        note = r"conformal: T, $\mu$ in any energy unit E"
        plain = "conformal: T, mu in any energy unit E"
    return ModelInfo(model_id, kind, d, not sourced, unit, note, delta, plain)


def grid_text(rows: pd.DataFrame) -> str:
    """A short description of a model's grid (for captions, in plain text): number of points and
    the ranges of T and mu."""
    if rows is None or not len(rows) or not {"T", "mu"} <= set(rows.columns):
        return "no grid points in the table"
    pts = rows[["T", "mu"]].drop_duplicates()
    nT, nmu = pts["T"].nunique(), pts["mu"].nunique()
    shape = f"{nT} T x {nmu} mu" if nT * nmu == len(pts) else f"{len(pts)} points"
    return (f"grid {shape}: T {pts['T'].min():.3g}..{pts['T'].max():.3g}, "
            f"mu {pts['mu'].min():.3g}..{pts['mu'].max():.3g}")


def provenance_text(tables: ScanTables) -> str:
    """Where the tables come from, for captions: scan, code hash and version of the tables."""
    return (f"scan '{tables.scan}', tables from physics code {tables.code_hash}, "
            f"holoscan {tables.package_version}")


def log_T_axis(T) -> bool:
    """Use a logarithmic T axis when the drawable temperatures are positive and span a factor of 8
    or more."""
    T = pd.Series(np.asarray(T, float))
    T = T[drawable(T)]
    return bool(len(T) and T.min() > 0 and T.max() / T.min() >= 8.0)

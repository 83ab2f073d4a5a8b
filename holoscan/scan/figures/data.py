"""The tables of one finished scan, read for plotting, and what each model's axes mean.

Units as in the tables: ``T``, ``mu`` in the energy unit E of the config; for a sourced ``emd``
model E is the source's own scale ``J^(1/(4-Delta))`` (times ``energy_scale``). Reduced ratios
(``s_hat = s/T^(d-1)``, ``P_hat = P/T^d``, ``chi2_hat = chi2/T^(d-2)``, ``trace_anomaly``, ``cs2``)
are pure numbers. The condensate ``<O>`` (``extra.condensate``) has dimension ``E^Delta``.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import pandas as pd
import pyarrow.parquet as pq

TABLES = ("points", "phases", "transitions", "critical_points")


@dataclass
class ScanTables:
    """The four tables of a scan as DataFrames, and the run metadata of the points table."""

    root: Path
    points: pd.DataFrame
    phases: pd.DataFrame
    transitions: pd.DataFrame
    critical: pd.DataFrame
    meta: dict

    @property
    def scan(self) -> str:
        return str(self.meta.get("scan") or self.root.name)

    @property
    def code_hash(self) -> str:
        return str(self.meta.get("code_hash", "unknown"))

    @property
    def package_version(self) -> str:
        return str(self.meta.get("package_version", "unknown"))

    def models(self) -> list[tuple[str, str]]:
        """``(model_id, kind)`` in config order (from the metadata), else in table order."""
        blocks = (self.meta.get("config") or {}).get("models") or []
        if blocks:
            return [(b["id"], b["kind"]) for b in blocks]
        pairs = self.points[["model_id", "kind"]].drop_duplicates()
        return [tuple(r) for r in pairs.itertuples(index=False)]

    def block(self, model_id: str) -> dict:
        """The model's config block (empty if the metadata has none)."""
        for b in (self.meta.get("config") or {}).get("models") or []:
            if b.get("id") == model_id:
                return b
        return {}


def _read(path: Path) -> pd.DataFrame:
    return pq.read_table(path).to_pandas() if path.exists() else pd.DataFrame()


def load_scan(results_dir) -> ScanTables:
    """Read ``points``, ``phases``, ``transitions`` and ``critical_points`` of ``results_dir``.

    The points table must exist; a missing phase table reads as empty (no shading, no lines).
    """
    root = Path(results_dir)
    points_file = root / "points.parquet"
    if not points_file.exists():
        raise FileNotFoundError(f"{points_file}: no points table (run the scan first)")
    raw = pq.read_schema(points_file).metadata or {}
    meta = json.loads(raw[b"holoscan"]) if b"holoscan" in raw else {}
    return ScanTables(root, _read(points_file), _read(root / "phases.parquet"),
                      _read(root / "transitions.parquet"), _read(root / "critical_points.parquet"), meta)


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

    @property
    def title(self) -> str:
        return f"{self.model_id} ({self.kind}, d = {self.d})"


def model_info(tables: ScanTables, model_id: str, kind: str) -> ModelInfo:
    block = tables.block(model_id)
    rows = tables.points[tables.points["model_id"] == model_id] if len(tables.points) else tables.points
    d = int(rows["d"].iloc[0]) if len(rows) and "d" in rows else int(block.get("d", 4))
    sourced = kind == "emd" and bool(block.get("source", True))
    delta = None
    if kind == "charged-scalar":
        delta = block.get("delta")
        if delta is None and "m_sq" in block:
            delta = d / 2 + math.sqrt(d * d / 4 + float(block["m_sq"]))
        delta = float(delta) if delta is not None else None
    if sourced:
        scale = float(block.get("energy_scale", 1.0))
        unit = "source units"
        note = (r"T, $\mu$ in units of the source scale $J^{1/(4-\Delta)}$"
                + ("" if scale == 1.0 else f" (= {scale:g} E)"))
    else:
        unit = "E"
        note = r"conformal: T, $\mu$ in any energy unit E"
    return ModelInfo(model_id, kind, d, not sourced, unit, note, delta)


def grid_text(rows: pd.DataFrame) -> str:
    """A short description of a model's grid: number of points and the ranges of T and mu."""
    if rows is None or not len(rows):
        return "no grid points in the table"
    pts = rows[["T", "mu"]].drop_duplicates()
    nT, nmu = pts["T"].nunique(), pts["mu"].nunique()
    shape = f"{nT} T x {nmu} $\\mu$" if nT * nmu == len(pts) else f"{len(pts)} points"
    return (f"grid {shape}: T {pts['T'].min():.3g}..{pts['T'].max():.3g}, "
            f"$\\mu$ {pts['mu'].min():.3g}..{pts['mu'].max():.3g}")


def log_T_axis(T) -> bool:
    """Use a logarithmic T axis when the grid spans a factor of 8 or more."""
    T = pd.Series(T).dropna()
    return bool(len(T) and T.min() > 0 and T.max() / T.min() >= 8.0)

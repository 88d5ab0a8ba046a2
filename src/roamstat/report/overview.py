"""The deployment-level tables at the top of the report (plain pandas, no HTML)."""

from __future__ import annotations

import pandas as pd


def _rows_for(table: pd.DataFrame | None, column: str = "animal_id") -> pd.DataFrame:
    if table is None or table.empty or column not in table.columns:
        return pd.DataFrame(columns=[column])
    return table


def _by_animal(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` indexed by the animal id as text, one row per animal (the first)."""
    frame = frame.set_index(frame["animal_id"].astype(str))
    return frame[~frame.index.duplicated()]


def animal_ids(tables: dict, animals) -> list[str]:
    """Every analysed animal (kept fixes or results), in sorted order; rejected-only ids are in the quality table."""
    ids = {str(a.animal_id) for a in animals}
    for key in ("summary", "fixes", "fits", "null_tests", "residency", "ranges"):
        table = tables.get(key)
        if isinstance(table, pd.DataFrame) and "animal_id" in table.columns:
            ids.update(table["animal_id"].dropna().astype(str))
    return sorted(ids)


def null_models(null_tests: pd.DataFrame | None, preferred=()) -> list[str]:
    """Null models present in the table, in the configured order first."""
    present = list(dict.fromkeys(_rows_for(null_tests, "null_model")["null_model"].astype(str)))
    return [n for n in preferred if n in present] + [n for n in present if n not in preferred]


def comparison_table(tables: dict, ids: list[str], nulls: list[str]) -> pd.DataFrame:
    """One row per animal: fixes, steps, verdict (q) under each null, residency, KDE 95 % area."""
    out = pd.DataFrame({"animal_id": ids})
    summary = _rows_for(tables.get("summary"))
    for column, label in (("n_fixes", "fixes kept"), ("n_steps", "steps"), ("n_rejected", "rejected rows")):
        if column in summary.columns:
            out[label] = out["animal_id"].map(_by_animal(summary)[column])
    tests = _rows_for(tables.get("null_tests"))
    for null in nulls:
        part = _by_animal(tests[tests["null_model"].astype(str) == null])
        out[f"{null}: verdict"] = out["animal_id"].map(part["verdict"]) if "verdict" in part else None
        if "q_value" in part:
            out[f"{null}: q"] = out["animal_id"].map(part["q_value"])
    residency = _by_animal(_rows_for(tables.get("residency")))
    for column, label in (("pattern", "residency pattern"), ("range_study_candidate", "range-study candidate")):
        if column in residency.columns:
            out[label] = out["animal_id"].map(residency[column])
    ranges = _rows_for(tables.get("ranges"))
    if {"method", "level", "area_km2"} <= set(ranges.columns):
        kde95 = ranges[(ranges["method"].astype(str) == "kde") & (pd.to_numeric(ranges["level"], errors="coerce") == 95)]
        out["KDE 95 % area (km²)"] = out["animal_id"].map(_by_animal(kde95)["area_km2"])
    return out


def quality_table(rejected: pd.DataFrame | None) -> pd.DataFrame:
    """Rejected rows by reason code, most frequent first."""
    rejected = _rows_for(rejected, "reason_code")
    if rejected.empty:
        return pd.DataFrame(columns=["reason code", "reason", "rows"])
    reasons = rejected["reason"] if "reason" in rejected.columns else pd.Series("", index=rejected.index)
    grouped = (pd.DataFrame({"code": rejected["reason_code"].astype(str), "reason": reasons.astype(str)})
               .groupby("code", sort=True).agg(reason=("reason", "first"), rows=("reason", "size")).reset_index())
    grouped = grouped.sort_values(["rows", "code"], ascending=[False, True])
    return grouped.rename(columns={"code": "reason code"})[["reason code", "reason", "rows"]]


def animal_rows(table: pd.DataFrame | None, animal_id: str) -> pd.DataFrame:
    """The rows of one animal, without the ``animal_id`` column."""
    table = _rows_for(table)
    rows = table[table["animal_id"].astype(str) == animal_id]
    return rows.drop(columns="animal_id").reset_index(drop=True)

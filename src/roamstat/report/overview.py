"""The facts of the deployment overview at the top of the report (plain pandas and text, no HTML)."""

from __future__ import annotations

import pandas as pd

from roamstat.report.human import significant


def _rows_for(table: pd.DataFrame | None, column: str = "animal_id") -> pd.DataFrame:
    if table is None or table.empty or column not in table.columns:
        return pd.DataFrame(columns=[column])
    return table


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


# --- the decision-first overview ----------------------------------------------

#: Optional per-animal columns read when a stage wrote their table: (table, column, label).
OPTIONAL_COLUMNS = [("motion_models", "model", "movement model"), ("state_models", "stationary_p",
                                                                     "time in state")]


def reference_null(nulls: list[str]) -> str | None:
    """The null whose displacement the overview scales against: the unbounded walk when it ran."""
    from roamstat.registry import UNBOUNDED_WALK_NULL

    return UNBOUNDED_WALK_NULL if UNBOUNDED_WALK_NULL in nulls else (nulls[0] if nulls else None)


def preferred_areas(ranges: pd.DataFrame | None) -> pd.DataFrame:
    """Per animal the area to cite: ``kde_autocorr`` 95 % when present, else ``kde`` 95 %."""
    ranges = _rows_for(ranges)
    if not {"method", "level", "area_km2"} <= set(ranges.columns):
        return pd.DataFrame(columns=["animal_id", "method"])
    level = pd.to_numeric(ranges["level"], errors="coerce")
    method = ranges["method"].astype(str)
    rank = method.map({"kde_autocorr": 0, "kde": 1})
    chosen = ranges[(level == 95) & rank.notna()].assign(_rank=rank).sort_values(["animal_id", "_rank"], kind="stable")
    return chosen.drop(columns="_rank").drop_duplicates("animal_id")


def motion_best(models: pd.DataFrame | None) -> dict:
    """Best continuous-time movement model per animal (``motion_models`` rows with ``best``)."""
    models = _rows_for(models)
    if not {"model", "best"} <= set(models.columns):
        return {}
    best = models[models["best"].astype(str).str.lower().isin(["true", "1"])]
    return dict(zip(best["animal_id"].astype(str), best["model"].astype(str)))


def ratio_text(observed_m, median_m) -> str:
    """How many times the null's median end distance the animal went ("3.1×")."""
    try:
        ratio = float(observed_m) / float(median_m)
    except (TypeError, ValueError, ZeroDivisionError):
        return ""
    if ratio != ratio or ratio in (float("inf"), float("-inf")):
        return ""
    return f"{significant(ratio, 2)}×"


def sentence(animal: dict) -> str:
    """A plain-language sentence about one animal from its overview facts."""
    verdict, null, ratio = animal.get("verdict"), animal.get("null"), animal.get("ratio")
    if verdict == "farther":
        head = f"Ended {ratio} as far from its start as the median {null} random walk: farther than chance"
    elif verdict == "closer":
        head = f"Ended only {ratio} as far from its start as the median {null} random walk: closer than chance"
    elif verdict == "consistent":
        head = f"Ended about as far from its start as a {null} random walk ({ratio} its median)"
    elif verdict:
        head = f"Too little data to test against the {null} random walk"
    else:
        head = "No null test ran"
    pattern = animal.get("pattern")
    tail = f"; a {pattern} pattern" if pattern and not str(pattern).startswith(("insufficient", "undetermined", "–")) else ""
    candidate = "; a candidate for a home-range study" if animal.get("candidate") else ""
    return head + tail + candidate + "."


def disagreement(verdicts: dict, medians: dict) -> str:
    """One line on why the nulls disagree ("" when the decisive verdicts agree)."""
    decisive = {n: v for n, v in verdicts.items() if v in ("farther", "closer", "consistent")}
    if len(set(decisive.values())) < 2:
        return ""
    spread = {n: m for n, m in medians.items() if n in decisive and m == m and m is not None}
    said = ", ".join(f"{v} under {n}" for n, v in decisive.items())
    if len(spread) >= 2:
        far, near = max(spread, key=spread.__getitem__), min(spread, key=spread.__getitem__)
        return (f"Nulls disagree ({said}): the {far} null's walks end a median {spread[far] / 1000:.3g} km from the "
                f"start, the {near} null's {spread[near] / 1000:.3g} km; a null built from heavier-tailed or "
                "straighter steps travels farther, so 'farther' is harder to reach under it.")
    return f"Nulls disagree ({said}): the nulls differ in how far their walks travel."

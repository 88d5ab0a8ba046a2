"""The docs tables list exactly what the registries hold, and everything that shows a choice reads the registry.

Adding a family, a null, a range method or a screening rule fails here until its row is in the
docs table named in the assertion message (DEVELOPERS.md, "How to add ...").
"""

from __future__ import annotations

import re
from pathlib import Path

from roamstat.config import NULL_MODELS, Config
from roamstat.io.read import READ_REASONS
from roamstat.models.powerlaw_tail import PowerLaw, TruncatedPowerLaw
from roamstat.models.steps import FAMILIES, FULL_RANGE
from roamstat.models.turns import TURN_FAMILIES
from roamstat.ranges.estimate import MODEL_RANGES, RANGE_METHODS, RANGES
from roamstat.registry import NULLS, UNBOUNDED_WALK_NULL
from roamstat.report.text import methods_html
from roamstat.screen import REASONS

DOCS = Path(__file__).resolve().parents[1] / "docs"


def table_rows(page: str, header: str) -> list[list[str]]:
    """The body rows (cells, stripped) of the table in ``docs/<page>`` whose header row starts ``| header |``."""
    lines = (DOCS / page).read_text(encoding="utf-8").splitlines()
    start = next(i for i, line in enumerate(lines) if re.match(rf"\|\s*{re.escape(header)}\s*\|", line))
    rows = []
    for line in lines[start + 2:]:
        if not line.startswith("|"):
            break
        rows.append([cell.strip() for cell in line.strip().strip("|").split("|")])
    return rows


def code(cell: str) -> str:
    """The first `backticked` word of a cell."""
    return re.search(r"`([^`]+)`", cell).group(1)


def test_models_table_lists_the_step_and_turn_registries():
    rows = table_rows("models.md", "variable")
    steps = [code(r[1]) for r in rows if r[0] == "step"]
    turns = [code(r[1]) for r in rows if r[0] == "turn"]
    assert steps == [*FAMILIES, PowerLaw.name, TruncatedPowerLaw.name], "docs/models.md, Families table"
    assert turns == list(TURN_FAMILIES), "docs/models.md, Families table"


def test_full_range_set_is_the_family_registry():
    assert FULL_RANGE == tuple(FAMILIES)


def test_nulls_table_lists_the_null_registry():
    assert [code(r[0]) for r in table_rows("nulls.md", "null")] == list(NULLS.names()), "docs/nulls.md table"


def test_every_null_entry_loads_a_walk():
    from roamstat.nulls import Walk

    for entry in NULLS:
        walk = entry.load()
        # a step-based null is a Walk; the continuous-time one simulates at the fixes' own times
        assert issubclass(walk, Walk) or getattr(walk, "in_time", False), entry.name


def test_guide_gives_the_null_default_from_the_registry():
    row = next(r for r in table_rows("guide.md", "option") if r[0].startswith("`--null"))
    assert code(row[1]) == ",".join(NULLS.defaults()) == ",".join(Config().nulls), "docs/guide.md --null row"
    offered = [n for n in NULLS.names() if n not in NULLS.defaults()]
    assert all(f"`{n}`" in row[2] for n in offered), "docs/guide.md --null row names the offered-only nulls"


def test_unbounded_walk_null_is_registered():
    assert UNBOUNDED_WALK_NULL in NULLS and UNBOUNDED_WALK_NULL in NULL_MODELS


def test_ranges_table_lists_the_range_registry():
    rows = table_rows("ranges.md", "method")
    documented = {code(r[0]): tuple(int(v) for v in r[1].split(",")) for r in rows}
    assert documented == {name: m.levels for name, m in RANGE_METHODS.items()}, "docs/ranges.md, Methods table"
    assert RANGES + MODEL_RANGES == tuple((name, level) for name, levels in documented.items() for level in levels)


def test_reason_code_table_lists_screen_and_reader_codes():
    documented = [code(r[0]) for r in table_rows("outputs.md", "code")]
    assert documented == [*READ_REASONS, *REASONS], "docs/outputs.md, reason-code table"


def test_report_methods_name_the_registered_choices_and_only_the_nulls_run():
    every = methods_html(NULL_MODELS)
    for family in FAMILIES.values():
        assert family.prose in every
    for family in TURN_FAMILIES.values():
        assert family.prose in every
    for method in RANGE_METHODS.values():
        assert method.prose in every
    for entry in NULLS:
        assert entry.methods in every
    only_crw = methods_html(("crw",))
    assert NULLS["crw"].methods in only_crw
    assert all(e.methods not in only_crw for e in NULLS if e.name != "crw")

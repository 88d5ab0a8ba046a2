"""Spreadsheet day-first dates against ISO 8601 text: parse time of one million fixes (prints the ratio)."""

from __future__ import annotations

import time

import pandas as pd

from roamstat.io.times import parse_times


def _seconds(text: pd.Series) -> float:
    start = time.perf_counter()
    parse_times(text, "UTC", "bench", "timestamp")
    return time.perf_counter() - start


def main(n: int = 1_000_000) -> None:
    stamps = pd.date_range("2020-01-01", periods=n, freq="37s")
    iso = pd.Series(stamps.strftime("%Y-%m-%dT%H:%M:%SZ"), dtype="string")
    sheet = pd.Series(stamps.strftime("%d.%m.%Y %H:%M:%S"), dtype="string")
    t_iso, t_sheet = _seconds(iso), _seconds(sheet)
    print(f"{n} fixes: ISO 8601 {t_iso:.2f} s, day-first spreadsheet dates {t_sheet:.2f} s, "
          f"ratio {t_sheet / t_iso:.2f}")


if __name__ == "__main__":
    main()

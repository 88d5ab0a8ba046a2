"""Rejection rates of every null under field sampling, and the time they take (docs/nulls.md table).

For each kind of simulated animal (tests/field_sim.py) and each sampling scenario (a) 25 m error,
(b) 30 % missed fixes and two 2-day outages, (c) exponential irregular times with class-dependent
error, runs the crw, shuffle and ctcrw nulls on ``--animals`` animals with M = 199 and prints, per
null: animals tested, the count with p_value <= 0.05 (farther / closer), with p_curve <= 0.05, the
99 % binomial band of the count, the mean ratio of expected to simulated NSD, and the seconds per
animal.  The same animals as tests/test_nulls_field.py use other seeds here.

Usage: python benchmarks/field_calibration.py [--animals 100] [--kinds crw,ctcrw] [--scenarios a,b,c]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

from scipy import stats

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from field_sim import write_class_table  # noqa: E402
from test_nulls_field import ALPHA, deployment  # noqa: E402

NULLS = ("crw", "shuffle", "ctcrw")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--animals", type=int, default=100)
    parser.add_argument("--kinds", default="crw,ctcrw")
    parser.add_argument("--scenarios", default="a,b,c")
    args = parser.parse_args()
    table_path = write_class_table(Path(tempfile.mkdtemp()) / "classes.csv")
    print("kind scenario null tested p<=.05 (farther/closer) p_curve<=.05 band99 E/sim s/animal")
    for kind in args.kinds.split(","):
        for scenario in args.scenarios.split(","):
            start = time.perf_counter()
            table = deployment(kind, scenario, NULLS, args.animals, 7000 + ord(scenario), table_path)
            seconds = (time.perf_counter() - start) / args.animals
            for null, rows in table.groupby("null_model", sort=False):
                tested = rows[rows["p_value"].notna()]
                hit = tested["p_value"] <= ALPHA
                farther = int((hit & (tested["observed_net_m"] > tested["null_median_m"])).sum())
                band = stats.binom.interval(0.99, len(tested), ALPHA) if len(tested) else (0, 0)
                ratio = (tested["expected_nsd_m2"] / tested["simulated_mean_nsd_m2"]).mean()
                print(f"{kind} {scenario} {null} {len(tested)} {int(hit.sum())} ({farther}/{int(hit.sum()) - farther}) "
                      f"{int((tested['p_curve'] <= ALPHA).sum())} {band[0]:.0f}-{band[1]:.0f} {ratio:.3f} {seconds:.2f}",
                      flush=True)


if __name__ == "__main__":
    main()

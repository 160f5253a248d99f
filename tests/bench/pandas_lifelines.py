"""Time the usual alternative to lifedata on the benchmark's rows.

Reads the `lives` table (1 000 000 lives in 1 000 groups) that
`cargo run --release --example bench` builds in target/bench/bench.db, with
pandas, and fits a Weibull to each group with lifelines' WeibullFitter --
the same job as `SELECT grp, life_fit(age, failed) FROM lives GROUP BY grp`.
Prints the library versions and the wall time (median of 3 runs).

Run: python3 tests/bench/pandas_lifelines.py   (needs pandas and lifelines)
"""

import sqlite3
import statistics
import sys
import time
from pathlib import Path

import lifelines
import pandas as pd

DB = Path(__file__).resolve().parents[2] / "target" / "bench" / "bench.db"


def run():
    start = time.perf_counter()
    con = sqlite3.connect(DB)
    frame = pd.read_sql_query("SELECT grp, age, failed FROM lives", con)
    con.close()
    fits = {}
    for grp, rows in frame.groupby("grp"):
        f = lifelines.WeibullFitter().fit(rows["age"], event_observed=rows["failed"])
        fits[grp] = (f.rho_, f.lambda_)
    return time.perf_counter() - start, len(fits)


def main():
    if not DB.exists():
        sys.exit(f"{DB} is missing: run `cargo run --release --example bench` first")
    times = []
    for _ in range(3):
        seconds, groups = run()
        times.append(seconds)
    print(
        f"python {sys.version.split()[0]}, pandas {pd.__version__}, lifelines {lifelines.__version__}: "
        f"{groups} groups fitted in {statistics.median(times):.2f} s (median of 3)"
    )


if __name__ == "__main__":
    main()

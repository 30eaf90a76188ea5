"""History store under concurrent first writers: the 50 rounds × 8 writers target.

Each round, 8 fresh interpreters create a store that does not exist yet at the
same moment and keep one record each (through the public store API); a second
part runs rounds of 8 real `rfmeas analyze --db` processes on the bundled
sample set (RFMEAS_BENCH_CLI_ROUNDS, default 10; they take a few seconds each
on two cores). Printed: rounds × writers, failed writers, lost records,
integrity, time. Target: no failed writer, no lost record, integrity ok.
"""

import os

from store_race import run_round

API_ROUNDS = 50
WRITERS = 8


def _run(tmp_path, rounds: int, via_cli: bool, label: str) -> None:
    failed = lost = mismatched = bad = 0
    times = []
    for n in range(rounds):
        r = run_round(tmp_path / f"{label}{n}", WRITERS, via_cli=via_cli)
        failed += len(r.failures)
        lost += r.lost
        mismatched += int(len(r.stored_ids) != r.succeeded)
        bad += int(r.integrity != "ok" or r.orphans != 0)
        times.append(r.elapsed_s)
        for failure in r.failures:
            print(f"  round {n}: {failure}")
    print(f"\n{label}: {rounds} rounds x {WRITERS} writers: {failed} failed writers, {lost} lost records, "
          f"{mismatched} rounds whose row count differs from the successful runs, {bad} rounds not intact; "
          f"round time median {sorted(times)[len(times) // 2]:.2f} s, max {max(times):.2f} s, "
          f"total {sum(times):.0f} s")
    assert failed == lost == mismatched == bad == 0


def test_store_api_writers(tmp_path):
    _run(tmp_path, API_ROUNDS, False, "store API")


def test_cli_analyze_writers(tmp_path):
    _run(tmp_path, int(os.environ.get("RFMEAS_BENCH_CLI_ROUNDS", "10")), True, "rfmeas analyze")

"""Subprocess for the concurrency tests: wait for a start time, then keep one record.

Usage: python store_writer.py DB_PATH START_TIME TAG [COUNT]
Sleeps until START_TIME (time.time() seconds) so that every writer of a round
opens the store at the same moment, then records COUNT (default 1) small
analyses through the public store API, printing each record id once it is
committed. On a project error it prints it on stderr and exits with its code
(2), as the CLI would.
"""

import sys
import time

from rfmeas.errors import RfmeasError
from rfmeas.history.store import HistoryStore


def main() -> int:
    db_path, start, tag = sys.argv[1], float(sys.argv[2]), sys.argv[3]
    count = int(sys.argv[4]) if len(sys.argv) > 4 else 1
    delay = start - time.time()
    if delay > 0:
        time.sleep(delay)
    sweep = f"! writer {tag}\n# MHz S RI R 50\n1 0.1 0.2\n2 0.3 0.4\n".encode()
    manifest = f'[transformer]\nname = "unit {tag}"\n\n[[sweep]]\nfile = "a.s1p"\n'
    try:
        with HistoryStore(db_path) as store:
            for n in range(count):
                record_id = store.record(f"unit {tag}", manifest, [("manifest.toml", manifest.encode()),
                                                                   (f"a{n}.s1p", sweep + str(n).encode())],
                                         {"name": f"unit {tag}", "n": n})
                print(record_id, flush=True)
    except RfmeasError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return exc.exit_code
    return 0


if __name__ == "__main__":
    sys.exit(main())

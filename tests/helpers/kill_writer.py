"""Subprocess for the crash test: begins writing a large record, says so, then waits to be killed.

Usage: python kill_writer.py DB_PATH SIZE_BYTES
It prints "in-transaction" once the record's rows (a blob large enough to spill
past SQLite's page cache into the WAL file) are written but not committed.
"""

import os
import sys
import time

from rfmeas.history.store import HistoryStore, _checked_sources


def main() -> None:
    db_path, size = sys.argv[1], int(sys.argv[2])
    store = HistoryStore(db_path)
    conn = store._connect()
    rows = _checked_sources([("big.s2p", os.urandom(size))])
    with store._transaction(conn):
        store._insert(conn, "half unit", "[transformer]\n", rows, '{"name": "half unit"}', "test")
        print("in-transaction", flush=True)
        time.sleep(60)  # the test kills us here, before COMMIT


if __name__ == "__main__":
    main()

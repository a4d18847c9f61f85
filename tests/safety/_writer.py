"""Keep writing while a backup is taken (used by test_backup.py).

usage: _writer.py URL SEED COUNT
Saves instruments w-00000, w-00001, ... one transaction each, in order, each with full
evidence, printing "started" after the first one and "done" at the end. A consistent copy of
the database therefore holds exactly w-00000..w-K for some K, each complete.
"""

import dataclasses
import sys

from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

url, seed, count = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
cat = generate_catalogue(count, n_jobs=0, seed=seed)
with Store.open(url, user="writer") as store:
    for i, inst in enumerate(cat.instruments):
        store.save_instrument(dataclasses.replace(inst, key=f"w-{i:05d}"))
        if i == 0:
            print("started", flush=True)
print("done", flush=True)

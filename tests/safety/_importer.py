"""Import a large generated catalogue in one go (used by test_kill_import.py, which kills this
process with SIGKILL partway).

usage: _importer.py URL N_INSTRUMENTS SEED
Prints "generated" when the catalogue is built, "importing" just before the import starts and
"done" after it committed.
"""

import sys

from vetting.records.store import Store
from vetting.records.synthetic import generate_catalogue

url, n, seed = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
cat = generate_catalogue(n, seed=seed)
print("generated", flush=True)
with Store.open(url, user="importer") as store:
    print("importing", flush=True)
    store.import_catalogue(cat, source="synthetic")
print("done", flush=True)

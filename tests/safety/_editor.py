"""One person editing one instrument, in a process of its own (used by test_concurrency.py).

usage: _editor.py URL INSTRUMENT_KEY USER NEW_TITLE SYNC_DIR
Reads the instrument, announces SYNC_DIR/USER.read, waits for SYNC_DIR/go-USER (or
SYNC_DIR/go-all), changes the title and saves. Prints one JSON line with the outcome.
"""

import json
import sys
import time
from pathlib import Path

from vetting.records.errors import ConcurrentEdit
from vetting.records.store import Store

url, key, user, title, sync = sys.argv[1:6]
sync_dir = Path(sync)
with Store.open(url, user=user) as store:
    inst = store.instrument(key)
    read_version = inst.row_version
    (sync_dir / f"{user}.read").write_text(str(read_version))
    deadline = time.monotonic() + 60
    while not ((sync_dir / f"go-{user}").exists() or (sync_dir / "go-all").exists()):
        if time.monotonic() > deadline:
            print(json.dumps({"ok": False, "error": "never told to go"}))
            sys.exit(3)
        time.sleep(0.005)
    inst.title = title
    try:
        saved = store.save_instrument(inst)
    except ConcurrentEdit as exc:
        print(json.dumps({"ok": False, "refused": True, "who": exc.who, "when": exc.when,
                          "message": str(exc), "read_version": read_version}))
    else:
        print(json.dumps({"ok": True, "row_version": saved.row_version, "read_version": read_version}))

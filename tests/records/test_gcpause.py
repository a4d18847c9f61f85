"""The garbage-collector pause is shared by threads: one thread finishing its pause must not
switch the collector back on while another thread is still in its own (the interface loads the
catalogue and the jobs in two workers at once). Common practice, no published source: the
collector is one process-wide switch (Python documentation, gc.disable)."""

from __future__ import annotations

import gc
import threading

from vetting.records.gcpause import gc_pause, gc_paused


def test_overlapping_pauses_in_two_threads():
    assert gc.isenabled()
    first_in, second_in, first_out = threading.Event(), threading.Event(), threading.Event()
    seen: dict[str, bool] = {}

    def first():
        with gc_pause():
            first_in.set()
            second_in.wait(5)
        first_out.set()

    def second():
        first_in.wait(5)
        with gc_pause():
            second_in.set()
            first_out.wait(5)
            seen["after the first thread ended its pause"] = gc.isenabled()

    threads = [threading.Thread(target=first), threading.Thread(target=second)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(10)
    assert seen == {"after the first thread ended its pause": False}
    assert gc.isenabled()  # switched back on when the last pause ended


def test_collector_left_off_when_it_was_off():
    gc.disable()
    try:
        with gc_pause():
            assert not gc.isenabled()
        assert not gc.isenabled()
    finally:
        gc.enable()


def test_decorator_and_errors():
    @gc_paused
    def fails():
        assert not gc.isenabled()
        raise ValueError("boom")

    try:
        fails()
    except ValueError:
        pass
    assert gc.isenabled()


def test_pausing_can_be_turned_off_for_a_program_that_defers_full_collections():
    from vetting.records import gcpause

    gcpause.set_pausing(False)
    try:
        with gc_pause():
            assert gc.isenabled()  # young collections go on in small steps
        assert gc.isenabled()
    finally:
        gcpause.set_pausing(True)
    with gc_pause():
        assert not gc.isenabled()
    assert gc.isenabled()

"""Warnings collected per thread (proxies.warning_sinks): each thread's sink gets exactly its
own warnings, also while another thread keeps quietening its all-NaN RuntimeWarnings. With
``catch_warnings`` blocks instead (the science code's before), this test fails (checked), and a
two-thread run lost a date's warning on one run and kept it on the next (tests/test_flows.py's
recompute check, about one run in three)."""

from __future__ import annotations

import sys
import threading
import time
import warnings

from proxies.warning_sinks import collected_warnings, quiet_warnings


def _warn(text: str) -> None:
    # attributed to a proxies module, as the science code's own warnings are
    exec(compile(f"warnings.warn({text!r}, UserWarning)", "proxies_fake", "exec"),
         {"warnings": warnings, "__name__": "proxies.fake"})


def test_each_thread_gets_its_own_warnings_every_time():
    rounds, results, errors = 200, {}, []
    barrier = threading.Barrier(3)
    switch = sys.getswitchinterval()
    sys.setswitchinterval(1e-6)  # threads switch often, as stages on a loaded machine do

    def collector(name: str) -> None:
        barrier.wait()
        got = []
        for index in range(rounds):
            with collected_warnings() as sink:
                _warn(f"{name}-{index}")
                time.sleep(0)
                _warn(f"{name}-{index}")  # the same message twice: shown twice ("always")
            got.append(list(sink))
        results[name] = got

    def churn() -> None:
        barrier.wait()
        for _ in range(rounds * 3):
            with quiet_warnings(RuntimeWarning):
                warnings.warn("all-NaN slice", RuntimeWarning)
                time.sleep(0)

    threads = [threading.Thread(target=collector, args=(n,)) for n in ("a", "b")] + [threading.Thread(target=churn)]
    for thread in threads:
        thread.start()
    try:
        for thread in threads:
            thread.join()
    finally:
        sys.setswitchinterval(switch)
    assert not errors
    for name in ("a", "b"):
        assert results[name] == [[f"{name}-{i}", f"{name}-{i}"] for i in range(rounds)]


def test_nested_sinks_and_no_sink():
    with collected_warnings() as outer:
        _warn("outer")
        with collected_warnings() as inner:
            _warn("inner")
        _warn("outer again")
    assert outer == ["outer", "outer again"] and inner == ["inner"]
    with collected_warnings() as sink, quiet_warnings(RuntimeWarning):
        warnings.warn("dropped", RuntimeWarning)
        _warn("kept")
    assert sink == ["kept"]
    with warnings.catch_warnings(record=True) as caught:  # no sink open: shown as before
        warnings.simplefilter("always")
        _warn("plain")
    assert [str(w.message) for w in caught] == ["plain"]

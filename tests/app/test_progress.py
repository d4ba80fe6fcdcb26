"""Progress bars of the command line, driven by the library's progress callbacks."""

from __future__ import annotations

from kinfit.app.progress import ProgressBar, SamplingBar


def test_progress_bar_counts_fits():
    bar = ProgressBar("fitting candidates")
    for done in (1, 2, 3):
        bar(done, 3, f"candidate {done}")
    assert bar.bar.length == 3 and bar.bar.pos == 3
    bar.close()


def test_sampling_bar_follows_a_resumed_chain():
    # a chain resumed after 40 of 50 steps reports 41, 42, ...: the bar starts there
    bar = SamplingBar()
    bar(41, 50, "sampling")
    assert bar.bar.n == 41 and bar.bar.total == 50
    for done in range(42, 51):
        bar(done, 50, "sampling")
    assert bar.bar.n == 50
    bar.close()
    SamplingBar().close()          # never started: nothing to close

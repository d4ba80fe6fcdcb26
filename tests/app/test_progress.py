"""Progress bars of the command line, driven by the library's progress callbacks."""

from __future__ import annotations

from kinfit.app.progress import COMPILE_NOTICE, ProgressBar, SamplingBar, compile_first


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


# ------------------------------------------------------- the one-off compilation

def _cold_and_warm(cache, code):
    """Run `code` twice in fresh processes sharing an empty numba cache folder."""
    import os
    import subprocess
    import sys
    import time

    env = dict(os.environ, NUMBA_CACHE_DIR=str(cache))
    runs = []
    for _ in range(2):
        start = time.monotonic()
        proc = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                              text=True, timeout=600)
        assert proc.returncode == 0, proc.stderr
        runs.append((proc, time.monotonic() - start))
    return runs


def test_a_cold_cache_is_compiled_once_with_one_line_saying_so(tmp_path):
    # a fresh NUMBA_CACHE_DIR is a new machine as numba sees it (numba's documented
    # cache location override); the second process finds the cache warm
    code = ("from kinfit.numerics.integrate import compiled_cache_ready; "
            "print(compiled_cache_ready()); "
            "from kinfit.app.progress import compile_first; print(compile_first()); "
            "print(compiled_cache_ready())")
    (cold, cold_time), (warm, warm_time) = _cold_and_warm(tmp_path / "numba", code)
    lines = cold.stderr.splitlines()
    assert lines[0] == COMPILE_NOTICE and "once" in lines[0]
    assert lines[1].startswith("  compiled in ") and lines[1].endswith(" s (cached for later runs)")
    assert len(lines) == 2                 # not a terminal: no counting seconds
    first, seconds, after = cold.stdout.split()
    assert first == "False" and after == "True" and float(seconds) > 0
    assert warm.stderr == "" and warm.stdout.split() == ["True", "None", "True"]
    assert warm_time < cold_time


def test_the_notice_counts_seconds_on_a_terminal(monkeypatch):
    import io
    import time

    from kinfit.numerics import integrate

    class Terminal(io.StringIO):
        def isatty(self):
            return True

    monkeypatch.setattr(integrate, "compiled_cache_ready", lambda: False)
    monkeypatch.setattr(integrate, "compile_integrators", lambda: time.sleep(1.3))
    stream = Terminal()
    seconds = compile_first(stream)
    text = stream.getvalue()
    assert text.startswith(COMPILE_NOTICE + "\n") and "\r  compiling ... 1 s" in text
    assert text.endswith(f"  compiled in {seconds:.0f} s (cached for later runs)\n")
    monkeypatch.setattr(integrate, "compiled_cache_ready", lambda: True)
    quiet = Terminal()
    assert compile_first(quiet) is None and quiet.getvalue() == ""
    monkeypatch.setattr(integrate, "compiled_cache_ready", lambda: None)   # cannot tell
    assert compile_first(quiet) is None and quiet.getvalue() == ""

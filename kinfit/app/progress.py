"""Progress on stderr: bars driven by the library's callbacks, and the one-off compilation.

Long library calls report progress through a callback,
``progress(n_done, n_total, name)`` (ranking after each candidate fit,
sampling after each step), so that no layer below the application imports a
user interface. The bars here are such callbacks; each is created on the
first report, when the total is known, and must be closed.

The first integration on a machine compiles the integrators (about half a
minute, then cached by numba). :func:`compile_first` does it before a
command's work when numba's cache says it is still to come
(:func:`kinfit.numerics.integrate.compiled_cache_ready`), with one line
saying what is happening and that it happens once, the seconds counting on a
terminal, and the time it took; with a warm cache it prints nothing and
costs about a millisecond.
"""

from __future__ import annotations

import sys
import threading
import time

import typer

__all__ = ["ProgressBar", "SamplingBar", "compile_first", "COMPILE_NOTICE"]

COMPILE_NOTICE = ("kinfit is compiling its integrators for this machine: this happens once "
                  "and takes about half a minute; later runs start at once.")


class ProgressBar:
    """A progress bar of candidate fits on stderr (typer's bar)."""

    def __init__(self, label):
        self.label, self.bar = label, None

    def __call__(self, done, total, name):
        if self.bar is None:
            self.bar = typer.progressbar(length=total, label=self.label, show_pos=True,
                                         file=sys.stderr)
            self.bar.__enter__()
        self.bar.update(1)

    def close(self):
        if self.bar is not None:
            self.bar.__exit__(None, None, None)


class SamplingBar:
    """A bar of sampler steps on stderr (tqdm: steps per second and time left)."""

    def __init__(self):
        self.bar = None

    def __call__(self, done, total, name):
        if self.bar is None:     # a resumed chain starts part way
            from tqdm import tqdm

            self.bar = tqdm(total=total, initial=done - 1, unit="step", desc=name,
                            file=sys.stderr, dynamic_ncols=True, leave=False)
        self.bar.update(done - self.bar.n)

    def close(self):
        if self.bar is not None:
            self.bar.close()


def compile_first(stream=None):
    """Compile the integrators before a command's work if numba's cache is cold, saying so.

    Parameters
    ----------
    stream : file, optional
        Where to write (default: stderr).

    Returns
    -------
    float or None
        Seconds spent compiling; None when the cache was warm (or cannot be
        read), and nothing was printed.
    """
    from kinfit.numerics.integrate import compile_integrators, compiled_cache_ready

    if compiled_cache_ready() is not False:
        return None
    stream = sys.stderr if stream is None else stream
    typer.echo(COMPILE_NOTICE, file=stream)
    start, done = time.monotonic(), threading.Event()

    def tick():      # the seconds, counting, on a terminal
        while not done.wait(1.0):
            typer.echo(f"\r  compiling ... {time.monotonic() - start:.0f} s", file=stream,
                       nl=False)

    ticker = None
    if stream.isatty():
        ticker = threading.Thread(target=tick, daemon=True)
        ticker.start()
    try:
        compile_integrators()
    finally:
        done.set()
        if ticker is not None:
            ticker.join()
            typer.echo("\r", file=stream, nl=False)
    seconds = time.monotonic() - start
    typer.echo(f"  compiled in {seconds:.0f} s (cached for later runs)", file=stream)
    return seconds

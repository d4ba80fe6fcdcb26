"""Progress bars on stderr, driven by the library's progress callbacks.

Long library calls report progress through a callback,
``progress(n_done, n_total, name)`` (ranking after each candidate fit,
sampling after each step), so that no layer below the application imports a
user interface. The bars here are such callbacks; each is created on the
first report, when the total is known, and must be closed.
"""

from __future__ import annotations

import sys

import typer

__all__ = ["ProgressBar", "SamplingBar"]


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

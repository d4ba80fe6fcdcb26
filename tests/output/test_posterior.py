"""Posterior summaries and files."""

from __future__ import annotations

import json

from kinfit.core.formatting import CAUTIONS
from kinfit.output.posterior import format_posterior, write_posterior


def test_format_posterior(line_posterior):
    post, _ = line_posterior
    text = format_posterior(post)
    assert text.startswith("Posterior of 'zero order' given 1 runs (11 points)")
    assert ("NOT CONVERGED" in text) != text.splitlines()[3].startswith("CONVERGED")
    header = [line for line in text.splitlines() if "covariance 95 %" in line][0]
    assert header.split() == ["name", "unit", "posterior", "covariance", "95", "%", "profile",
                              "95", "%", "posterior", "95", "%", "flags"]
    assert "k: uniform on [0, 1] (from the model file)" in text
    assert "autocorrelation time τ (steps): k" in text
    assert " ".join(CAUTIONS.split()[:6]) in " ".join(text.split())


def test_write_posterior(line_posterior, tmp_path):
    post, _ = line_posterior
    written = write_posterior(tmp_path / "out", post)
    names = sorted(p.name for p in written)
    assert names == sorted(["chain.npz", "corner.png", "bands.png", "profiles.png",
                            "corner.svg", "bands.svg", "profiles.svg",
                            "posterior_summary.txt", "posterior.json"])
    data = json.loads((tmp_path / "out" / "posterior.json").read_text())
    assert data["parameters"]["k"]["unit"] == "M s^-1"
    assert not [p for p in (tmp_path / "out").iterdir() if ".part" in p.name]

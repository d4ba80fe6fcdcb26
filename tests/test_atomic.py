"""Outputs are written whole or not at all."""

from __future__ import annotations

import json

import pytest

from kinfit.atomic import atomic_path, write_json, write_text


def test_failed_write_leaves_the_old_file(tmp_path):
    target = tmp_path / "result.json"
    write_text(target, "old\n")
    with pytest.raises(RuntimeError):
        with atomic_path(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("killed")
    assert target.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == ["result.json"]


def test_json_has_no_nan(tmp_path):
    import numpy as np

    write_json(tmp_path / "x.json", {"a": float("nan"), "b": np.float64(1.5),
                                     "c": np.array([1, 2]), "d": float("inf")})
    assert json.loads((tmp_path / "x.json").read_text()) == {"a": None, "b": 1.5,
                                                               "c": [1, 2], "d": None}

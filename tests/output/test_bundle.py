"""Bundles of output files, and the one function that writes them."""

from __future__ import annotations

import pytest

from kinfit.core.errors import KinfitError
from kinfit.output.bundle import Bundle, figure_files, write_bundle


def test_a_bundle_keeps_order_and_joins_like_a_dict():
    a = Bundle({"summary.txt": "fit\n", "result.json": "{}\n"})
    b = Bundle({"result.json": "{\"x\": 1}\n", "fit.png": b"\x89PNG"})
    joined = a | b
    assert list(joined) == ["summary.txt", "result.json", "fit.png"]
    assert joined["result.json"] == "{\"x\": 1}\n" and list(a) == ["summary.txt", "result.json"]
    assert joined.data("summary.txt") == b"fit\n" and joined.data("fit.png") == b"\x89PNG"
    assert list(joined.within("best")) == ["best/summary.txt", "best/result.json",
                                           "best/fit.png"]
    assert list(joined.only(["fit.png", "missing.csv", "summary.txt"])) == ["fit.png",
                                                                           "summary.txt"]
    with pytest.raises(TypeError, match="expected bytes or str"):
        Bundle({"x.json": {"a": 1}})


def test_write_bundle_writes_every_file_whole_with_subfolders(tmp_path):
    bundle = Bundle({"ranking.txt": "é ranked\n", "best/result.json": "{}\n",
                     "best/fit.png": b"\x00\x01"})
    written = write_bundle(tmp_path / "out", bundle)
    assert written == [tmp_path / "out" / name for name in bundle]
    assert (tmp_path / "out" / "ranking.txt").read_text(encoding="utf-8") == "é ranked\n"
    assert (tmp_path / "out" / "best" / "fit.png").read_bytes() == b"\x00\x01"
    leftovers = [p for p in (tmp_path / "out").rglob("*") if ".part" in p.name]
    assert leftovers == []


def test_write_bundle_refuses_a_file_in_place_of_the_folder(tmp_path):
    (tmp_path / "out").write_text("a file")
    with pytest.raises(KinfitError, match="exists and is not a folder"):
        write_bundle(tmp_path / "out", {"result.json": "{}\n"})
    assert (tmp_path / "out").read_text() == "a file"


def test_figure_files_render_png_and_svg():
    from matplotlib.figure import Figure

    fig = Figure()
    fig.subplots().plot([0, 1], [1, 0])
    files = figure_files({"fit": fig})
    assert list(files) == ["fit.png", "fit.svg"]
    # PNG signature (ISO/IEC 15948) and an SVG root element
    assert files["fit.png"].startswith(b"\x89PNG\r\n\x1a\n")
    assert files["fit.svg"].rstrip().endswith(b"</svg>")

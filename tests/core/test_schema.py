"""Schema versions of kinfit's JSON files, and what readers accept."""

from __future__ import annotations

import json

import pytest

from kinfit.core.errors import KinfitError
from kinfit.core.schema import SCHEMAS, check_schema, schema_json


def test_every_file_kind_is_versioned_in_its_own_name():
    assert set(SCHEMAS) == {"result", "posterior", "ranking", "temperature", "prediction",
                            "signals", "provenance"}
    for kind, tag in SCHEMAS.items():
        assert tag == f"kinfit.{kind}/1"


def test_the_schema_is_the_first_key_and_the_text_is_strict_json():
    text = schema_json("result", {"model": "m", "chi2": float("nan"), "schema": "old"})
    # strict JSON (RFC 8259 has no NaN): Python's parser with the extension refused
    data = json.loads(text, parse_constant=lambda name: pytest.fail(f"non-JSON {name}"))
    assert list(data) == ["schema", "model", "chi2"]
    assert data == {"schema": "kinfit.result/1", "model": "m", "chi2": None}
    assert text.endswith("}\n")


@pytest.mark.parametrize("data", [
    {"model": "m"},                                   # written before versions were recorded
    {"schema": "kinfit.result/1", "model": "m"},
    {"schema": "kinfit.result/1.3", "model": "m"},    # a later minor version adds keys only
    ["not", "a", "dict"],
])
def test_readers_accept_files_with_and_without_the_key(data):
    assert check_schema(data, "result", "result.json") is data


@pytest.mark.parametrize("tag, message", [
    ("kinfit.result/2", r"result\.json: schema 'kinfit\.result/2' is not one this kinfit "
                        r"reads \(kinfit\.result/1\)"),
    ("kinfit.result/x", "is not one this kinfit reads"),
    ("kinfit.posterior/1", r"holds 'kinfit\.posterior/1', not a kinfit\.result file"),
])
def test_readers_refuse_another_major_version_or_kind_in_one_line(tag, message):
    with pytest.raises(KinfitError, match=message) as info:
        check_schema({"schema": tag}, "result", "result.json")
    assert "\n" not in str(info.value)

"""Every example study in configs/ is valid, against both the pydantic models and the
exported JSON Schema, and its estimate is computable without running it."""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import pytest
import yaml

import covergrid

REPO = Path(__file__).resolve().parents[1]
EXAMPLES = sorted((REPO / "configs").glob("*.yaml"))


def test_there_are_examples():
    names = {p.stem for p in EXAMPLES}
    assert "demo" in names and len(names) >= 4


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_example_study_is_valid(path):
    study = covergrid.load_study(path)
    assert len(covergrid.resolve(study).elements) >= 1
    est = covergrid.estimate(study)
    assert est["cells"] > 0 and est["visits"] > 0
    schema = json.loads((REPO / "configs" / "schema.json").read_text(encoding="utf-8"))
    data = yaml.safe_load(path.read_text(encoding="utf-8"))
    # YAML reads unquoted timestamps as datetimes; the study file takes them as ISO text
    data["epoch"] = str(study.epoch)
    jsonschema.validate(data, schema)

"""Validate what sweepd prints or writes against the shipped JSON Schemas
(configs/schemas/*.schema.json, draft 2020-12) with the ``jsonschema`` library."""

from __future__ import annotations

import functools
import json
from pathlib import Path
from typing import Any

import jsonschema
from referencing import Registry, Resource

SCHEMAS = Path(__file__).resolve().parents[1] / "configs" / "schemas"


@functools.lru_cache(maxsize=1)
def registry() -> Registry:
    resources = []
    for path in sorted(SCHEMAS.glob("*.schema.json")):
        schema = json.loads(path.read_text())
        resources.append((schema["$id"], Resource.from_contents(schema)))
    return Registry().with_resources(resources)


def schema(name: str) -> dict[str, Any]:
    return json.loads((SCHEMAS / f"{name}.schema.json").read_text())


def validate(document: Any, name: str) -> Any:
    """Raise ``jsonschema.ValidationError`` unless ``document`` fits ``<name>.schema.json``;
    returns the document (a str is parsed first) for further checks."""
    if isinstance(document, str):
        document = json.loads(document)
    validator = jsonschema.Draft202012Validator(schema(name), registry=registry())
    validator.validate(document)
    return document


def one_json_object(stdout: str) -> Any:
    """The single JSON document a ``--json`` command printed (nothing else on stdout)."""
    text = stdout.strip()
    document = json.loads(text)  # fails on a second object or trailing text
    assert isinstance(document, dict), text
    return document

"""The JSON API's one description: request bodies are checked against it and the OpenAPI 3
document served at /api/v1/openapi.json is generated from it, so the two cannot disagree."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

#: the largest whole number a body may hold (ids, counts, post numbers)
MAX_INT = 2**31 - 1
#: the longest text a body field may hold unless it says otherwise
MAX_TEXT = 2000


@dataclass(frozen=True)
class Prop:
    """One property of a JSON body: its JSON type, what it means, its limits."""

    type: str
    text: str
    required: bool = False
    max_length: int = MAX_TEXT
    format: str | None = None
    #: for an object: its own properties (None: any scalar values)
    props: dict[str, Prop] | None = None
    #: for an array: the type of its items
    items: str | None = None
    minimum: int | None = None

    def schema(self) -> dict[str, Any]:
        """This property as a JSON Schema (OpenAPI 3.0 dialect)."""
        out: dict[str, Any] = {"type": self.type, "description": self.text}
        if self.type == "string":
            out["maxLength"] = self.max_length
        if self.format:
            out["format"] = self.format
        if self.type == "integer":
            out.update(minimum=self.minimum if self.minimum is not None else 0, maximum=MAX_INT)
        if self.type == "array":
            out.update(items={"type": self.items or "string", "maxLength": 64}, minItems=1,
                       maxItems=100)
        if self.type == "object":
            out.update(object_schema(self.props) if self.props is not None else {
                "additionalProperties": {"oneOf": [{"type": t} for t in SCALARS]}})
        return out


SCALARS = ("string", "number", "boolean")

STEP = {
    "items": Prop("array", "Codes of the items the session covers (one when it makes new "
                  "items: their parent).", required=True),
    "technique": Prop("string", "Technique code, e.g. sem-imaging.", required=True,
                      max_length=64),
    "occurred_at": Prop("string", "Start, ISO 8601 with its UTC offset.", required=True,
                        format="date-time", max_length=64),
    "ended_at": Prop("string", "End, ISO 8601 with its UTC offset.", format="date-time",
                     max_length=64),
    "operator": Prop("string", "Username of the person the step is attributed to.",
                     required=True, max_length=64),
    "params": Prop("object", "The technique's parameters by field name; numbers in the "
                   "field's unit, or text with a unit such as '500 pA'.", required=True),
    "confirm_warnings": Prop("boolean", "Record values outside their typical range."),
    "submission_key": Prop("string", "Repeat a call with the same key and nothing new is "
                           "written.", max_length=64),
    "children": Prop("object", "What a destructive step made.", props={
        "kind": Prop("string", "lamella, wedge, needle or fragment.", max_length=32),
        "count": Prop("integer", "How many.", minimum=1),
        "coupon": Prop("string", "Code of the coupon or grid they are placed on.",
                       max_length=64),
        "first_post": Prop("integer", "Post number of the first new item.", minimum=1),
    }),
    "summary": Prop("string", "One line for the timeline.", max_length=300),
    "note": Prop("string", "Free text."),
}
DATA_FILE = {
    "path": Prop("string", "Absolute path of the file on the instrument share.", required=True,
                 max_length=1000),
    "operator": Prop("string", "Username of the person registering it.", required=True,
                     max_length=64),
    "technique": Prop("string", "Technique code.", max_length=64),
    "step_id": Prop("integer", "Id of the step on this item that produced the file.",
                    minimum=1),
}


def object_schema(props: Mapping[str, Prop]) -> dict[str, Any]:
    """A JSON Schema object with these properties and no others."""
    out: dict[str, Any] = {"type": "object", "additionalProperties": False,
                           "properties": {n: p.schema() for n, p in props.items()}}
    required = [n for n, p in props.items() if p.required]
    if required:
        out["required"] = required
    return out


# ---- checking a body --------------------------------------------------------------------


def _bad_text(value: str, limit: int) -> str | None:
    if len(value) > limit:
        return f"at most {limit} characters"
    if "\x00" in value:
        return "text without NUL characters"
    try:
        value.encode("utf-8")
    except UnicodeEncodeError:
        return "valid Unicode text"
    return None


def _scalar_problem(value: Any) -> str | None:
    if isinstance(value, str):
        return _bad_text(value, MAX_TEXT)
    if isinstance(value, float) and not math.isfinite(value):
        return "a finite number"
    if value is None or isinstance(value, bool | int | float):
        return None
    return "a string, a number or true/false"


def problem(prop: Prop, value: Any) -> str | None:
    """What is wrong with one value, or None."""
    kind = {"string": str, "integer": int, "boolean": bool, "array": list, "object": dict}[
        prop.type]
    if not isinstance(value, kind) or (prop.type == "integer" and isinstance(value, bool)):
        return f"a JSON {prop.type}"
    if isinstance(value, str):
        return _bad_text(value, prop.max_length)
    if isinstance(value, int):
        low = prop.minimum if prop.minimum is not None else 0
        return None if low <= value <= MAX_INT else f"a whole number from {low} to {MAX_INT}"
    if isinstance(value, list):
        if not 1 <= len(value) <= 100:
            return "from 1 to 100 entries"
        bad = [v for v in value if not isinstance(v, str) or _bad_text(v, 64)]
        return f"item codes (text of at most 64 characters), not {bad[0]!r}" if bad else None
    if isinstance(value, dict) and prop.props is None:
        return next((f"{k}: {p}" for k, v in value.items() if (p := _scalar_problem(v))), None)
    return None


def check(body: Any, props: Mapping[str, Prop]) -> dict[str, list[str]]:
    """Every problem of a body against its description, by field; empty when it is fine."""
    if not isinstance(body, dict):
        return {"body": ["a JSON object"]}
    errors: dict[str, list[str]] = {}
    for name in body:
        if name not in props:
            errors.setdefault(str(name)[:64], []).append(
                "not a field here; fields: " + ", ".join(props))
    for name, prop in props.items():
        value = body.get(name)
        if value is None:
            if prop.required:
                errors.setdefault(name, []).append("required")
            continue
        said = problem(prop, value)
        if said is None and prop.props is not None:
            inner = check(value, prop.props)
            said = "; ".join(f"{k}: {', '.join(v)}" for k, v in inner.items()) or None
        if said:
            errors.setdefault(name, []).append(said)
    return errors


# ---- the document -----------------------------------------------------------------------

ERRORS = {"type": "object", "required": ["errors"], "properties": {
    "errors": {"type": "object", "description": "Messages by field name ('request' when the "
               "message is about the whole request).",
               "additionalProperties": {"type": "array", "items": {"type": "string"}}},
    "warnings": {"type": "array", "items": {"type": "object"},
                 "description": "Values outside their typical range (409 only)."}}}
ITEM = {"type": "object", "required": ["item", "history", "files"], "properties": {
    "item": {"type": "object"},
    "history": {"type": "array", "items": {"type": "object"},
                "description": "The effective history: own events, and those inherited from "
                               "containers and ancestors, oldest first."},
    "files": {"type": "array", "items": {"type": "object"}}}}
STEP_RESULT = {"type": "object", "required": ["events", "children", "is_repeat"], "properties": {
    "events": {"type": "array", "items": {"type": "object"}},
    "children": {"type": "array", "items": {"type": "string"}},
    "warnings": {"type": "array", "items": {"type": "string"}},
    "is_repeat": {"type": "boolean"}, "submission_key": {"type": "string"}}}
CODE = {"name": "code", "in": "path", "required": True,
        "schema": {"type": "string", "minLength": 1, "maxLength": 64}}


def _json(schema: dict[str, Any], text: str) -> dict[str, Any]:
    return {"description": text, "content": {"application/json": {"schema": schema}}}


def _answers(ok: int, schema: dict[str, Any], text: str, *codes: int) -> dict[str, Any]:
    words = {400: "Refused: every problem by field.", 401: "No valid token.",
             404: "No such item or technique.", 409: "Conflict, or warnings to confirm.",
             413: "Body too large."}
    out = {str(ok): _json(schema, text)}
    out.update({str(c): _json(ERRORS, words[c]) for c in (401, *codes)})
    return out


def _body(props: Mapping[str, Prop]) -> dict[str, Any]:
    return {"required": True, "content": {"application/json": {"schema": object_schema(props)}}}


def document(server: str = "/api/v1") -> dict[str, Any]:
    """The OpenAPI 3.0 document of the API."""
    return {
        "openapi": "3.0.3",
        "info": {"title": "curation instrument API", "version": "1",
                 "description": "For instrument-side scripts. Send `Authorization: Bearer "
                                "<token>` with a station's token (`curation token add STATION`)."},
        "servers": [{"url": server}],
        "security": [{"station_token": []}],
        "components": {"securitySchemes": {"station_token": {"type": "http",
                                                             "scheme": "bearer"}}},
        "paths": {
            "/items/{code}": {"get": {
                "summary": "An item, its effective history and its data files",
                "operationId": "getItem", "parameters": [CODE],
                "responses": _answers(200, ITEM, "The item.", 404)}},
            "/items/{code}/files": {"post": {
                "summary": "Register a data file by its path, for the token's station",
                "operationId": "postDataFile", "parameters": [CODE],
                "requestBody": _body(DATA_FILE),
                "responses": _answers(201, {"type": "object"}, "Registered.", 400, 404, 409,
                                      413) | {"200": _json({"type": "object"},
                                                           "Already registered.")}}},
            "/steps": {"post": {
                "summary": "Log one instrument session at the token's station",
                "operationId": "postStep", "requestBody": _body(STEP),
                "responses": _answers(201, STEP_RESULT, "Recorded.", 400, 409, 413)
                | {"200": _json(STEP_RESULT, "A repeated submission key: nothing new.")}}},
            "/techniques/{code}": {"get": {
                "summary": "A technique's parameter spec: fields, units, ranges, choices",
                "operationId": "getTechnique",
                "parameters": [CODE | {"schema": {"type": "string", "maxLength": 64}}],
                "responses": _answers(200, {"type": "object"}, "The spec.", 404)}},
        },
    }

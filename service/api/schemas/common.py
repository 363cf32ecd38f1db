"""Pieces every schema module uses: strict request models, field types, derived response models.

Requests forbid unknown fields (a misspelt option fails loudly instead of being ignored) and are
strict: a string or a number is never read as a boolean, a boolean never as a number. Times
travel as ISO 8601 strings and are parsed by the same parser the CLI uses; the pattern below
states in the schema what that parser accepts, so the schema refuses what the code would refuse.

Response documents built by :mod:`service.queries` are typed there as ``TypedDict`` classes (and
a forecast row in :mod:`models.prediction.windows`); :func:`typed_model` derives the response
model from such a type, so each shape is written once.
"""

from __future__ import annotations

import functools
import inspect
import types
import typing
from typing import Annotated, Any, Union

from pydantic import BaseModel, BeforeValidator, ConfigDict, Field, create_model

__all__ = [
    "INSTANT_ALLOWED",
    "INSTANT_PATTERN",
    "STEP_PATTERN",
    "Instant",
    "Level",
    "QueryBool",
    "RequestModel",
    "Threshold",
    "Zone",
    "typed_model",
]

# Years 1678-2261: the span of nanosecond timestamps the library computes with.
_YEAR = r"(167[89]|16[89][0-9]|1[7-9][0-9]{2}|2[01][0-9]{2}|22[0-5][0-9]|226[01])"
_DATE = _YEAR + r"-(0[1-9]|1[0-2])-(0[1-9]|[12][0-9]|3[01])"
_TIME = r"[T ]([01][0-9]|2[0-3]):[0-5][0-9](:[0-5][0-9](\.[0-9]{1,9})?)?"
_OFFSET = r"(Z|[+-]([01][0-9]|2[0-3]):?[0-5][0-9])"
#: ISO 8601 date or date-time, optional fraction and offset (``Z``, ``+05:30``, ``-0300``).
INSTANT_PATTERN = f"^{_DATE}({_TIME}{_OFFSET}?)?$"
#: Window step: a whole number of minutes, hours or days.
STEP_PATTERN = r"^[1-9][0-9]{0,5}(min|h|d)$"
INSTANT_ALLOWED = (
    "an ISO 8601 date-time with a UTC offset (2026-03-09T09:00-06:00), or a local time "
    "(2026-03-09T09:00) together with an IANA zone in 'tz'; years 1678-2261"
)

Level = Annotated[float, Field(gt=0.0, lt=1.0)]
Threshold = Annotated[int, Field(ge=0, le=1_000_000_000)]
Instant = Annotated[
    str,
    Field(
        min_length=10,
        max_length=40,
        pattern=INSTANT_PATTERN,
        description=INSTANT_ALLOWED,
        examples=["2026-03-09T09:00-06:00"],
    ),
]
Zone = Annotated[
    str,
    Field(
        min_length=1,
        max_length=64,
        description="IANA zone for times given without an offset, e.g. America/Chicago.",
        examples=["America/Chicago"],
    ),
]


def _query_bool(value: Any) -> Any:
    # A query string carries text; only the two JSON spellings are read as a boolean.
    if isinstance(value, str):
        if value in ("true", "false"):
            return value == "true"
        raise ValueError(f"{value!r} is not a boolean; allowed: true or false")
    return value


#: A boolean in a query string: ``true`` or ``false``, nothing else (not ``yes``, ``1``, ``on``).
QueryBool = Annotated[bool, BeforeValidator(_query_bool), Field(strict=True)]


class RequestModel(BaseModel):
    """Base of every request body: unknown fields refused, no type coercion."""

    model_config = ConfigDict(extra="forbid", strict=True)


def _absent_not_null(schema: dict[str, Any]) -> None:
    schema.pop("default", None)


def _swap(hint: Any) -> Any:
    """``hint`` with every ``TypedDict`` inside it replaced by its derived model."""
    if typing.is_typeddict(hint):
        return typed_model(hint)
    origin, args = typing.get_origin(hint), typing.get_args(hint)
    if not args:
        return hint
    swapped = tuple(_swap(a) for a in args)
    if origin in (Union, types.UnionType):
        return functools.reduce(lambda a, b: a | b, swapped)
    if origin is Annotated:
        return Annotated[(swapped[0], *hint.__metadata__)]
    return origin[swapped] if len(swapped) > 1 else origin[swapped[0]]


@functools.cache
def typed_model(typed: type, **replace: Any) -> type[BaseModel]:
    """The pydantic model of a ``TypedDict`` (same name, keys, types and docstring).

    Keys that are ``NotRequired`` become optional fields without a default in the schema (they
    are absent, never null); routes returning such a model set ``response_model_exclude_unset``.
    ``replace`` gives other types for some keys (e.g. a dataclass the document holds as a dict).
    """
    # Read from the annotations: with postponed annotations ``__required_keys__`` lists every key.
    hints = typing.get_type_hints(typed, include_extras=True)
    fields: dict[str, Any] = {}
    for key, hint in hints.items():
        optional = typing.get_origin(hint) is typing.NotRequired
        if typing.get_origin(hint) in (typing.NotRequired, typing.Required):
            hint = typing.get_args(hint)[0]
        kind = replace.get(key, _swap(hint))
        if optional:
            fields[key] = (kind, Field(None, json_schema_extra=_absent_not_null))
        else:
            fields[key] = (kind, ...)
    model = create_model(  # type: ignore[call-overload]
        typed.__name__,
        __doc__=inspect.getdoc(typed),
        __module__=typed.__module__,
        **fields,
    )
    return typing.cast(type[BaseModel], model)

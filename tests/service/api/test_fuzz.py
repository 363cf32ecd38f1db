"""Property-based fuzzing of every operation in the OpenAPI schema (schemathesis): never a 5xx.

Both schema-valid and schema-violating requests are generated; each answer must be a non-5xx
status that the schema documents, with a documented media type and (for JSON) a body matching the
documented schema. Bounded and derandomised so it runs in seconds, the same way every time.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import schemathesis
from hypothesis import HealthCheck, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from models.store import MemoryStore
from service.main import create_app
from tests.service.api.support import ADMIN, hump_table, publish
from tests.service.api.support import settings as app_settings

CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_schema_conformance,
]


def _app() -> Any:
    # An in-memory store keeps collection free of disk work; the routes are the same.
    store = MemoryStore()
    publish(store, "desk-a", hump_table(), draws=20, latent_rho=0.5, latent_sd=0.2)  # type: ignore[arg-type]
    publish(store, "desk-b", hump_table(0.3), draws=20)  # type: ignore[arg-type]
    config = app_settings(Path("unused"), admin_token=ADMIN, max_windows=500, max_batch_items=50)
    return create_app(config, store=store)


schema = schemathesis.openapi.from_asgi("/openapi.json", _app())


@schema.parametrize()
@settings(
    max_examples=25,
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=list(HealthCheck),
)
def test_no_operation_answers_5xx(case: Any) -> None:
    case.call_and_validate(headers={"Authorization": f"Bearer {ADMIN}"}, checks=CHECKS)

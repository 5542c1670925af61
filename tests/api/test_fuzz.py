"""Property-based requests from the app's own OpenAPI schema (schemathesis), in-process.

Every operation gets generated requests, valid and invalid; no answer may be a 5xx, and
every answer must match what the schema declares for its status and media type. The run
is seeded (derandomized) and bounded: a few dozen examples per operation, well under two
minutes in total on two cores.
"""

from __future__ import annotations

import tempfile
from pathlib import Path

import pytest
import schemathesis
from hypothesis import HealthCheck, Phase, settings
from schemathesis import checks

from service.app import create_app
from service.config import Settings

EXAMPLES_PER_OPERATION = 30


# The schema is read when the module is collected, so the app (and its SQLite file in a
# temporary folder) exists from then on; schemathesis starts its lifespan on first use and
# keeps it to the end of the session.
_DATA = tempfile.TemporaryDirectory(prefix="foldwise-fuzz-")
APP = create_app(
    Settings(data_dir=Path(_DATA.name) / "data", max_tones=5000, max_body_bytes=2_000_000)
)
schema = schemathesis.openapi.from_asgi("/openapi.json", APP)


@pytest.mark.slow
@schema.parametrize()
@settings(
    max_examples=EXAMPLES_PER_OPERATION,
    deadline=None,
    derandomize=True,
    phases=[Phase.explicit, Phase.generate],
    suppress_health_check=list(HealthCheck),
)
def test_api_conforms(case: schemathesis.Case) -> None:
    case.call_and_validate(
        checks=[
            checks.not_a_server_error,
            checks.status_code_conformance,
            checks.content_type_conformance,
            checks.response_schema_conformance,
        ]
    )

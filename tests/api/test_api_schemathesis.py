"""Property-based API test (Schemathesis 4): no generated request may cause a server error.

Every operation of /openapi.json is called with generated (valid and invalid)
inputs through the ASGI app, authenticated as the project owner with a bearer
token; the only check is ``not_a_server_error`` (no 5xx). Examples per
operation are kept small so the run takes about a minute.
"""

from __future__ import annotations

import pytest
import schemathesis
from hypothesis import HealthCheck, settings
from schemathesis.checks import not_a_server_error


@pytest.fixture
def api_schema(app, team, scenario):
    return schemathesis.openapi.from_asgi("/openapi.json", app)


schema = schemathesis.pytest.from_fixture("api_schema")


@pytest.mark.slow
@schema.parametrize()
@settings(max_examples=6, deadline=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
def test_no_server_errors(case, team):
    response = case.call(headers={"Authorization": f"Bearer {team.tokens['owner']}"})
    case.validate_response(response, checks=[not_a_server_error])

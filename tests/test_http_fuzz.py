"""Property/fuzz test of the HTTP bridge against its own OpenAPI document (schemathesis).

Schemathesis reads ``/v1/openapi.json`` from the app, generates requests for
every operation (valid and invalid bodies and query strings) and sends them
through the WSGI app. Whatever comes in, no answer is a 5xx, and every answer
with a JSON body matches the response schema the document declares. Bounded:
a fixed number of examples per operation, no coverage phase, no deadline.
"""

import schemathesis
from hypothesis import HealthCheck, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import response_schema_conformance
import pytest

from trueband.bridge.http import create_app

pytestmark = pytest.mark.slow  # every test here takes seconds: the quick loop leaves the file out

app = create_app()


def load(examples):
    config = schemathesis.Config.from_dict(
        {"phases": {"coverage": {"enabled": False}}, "generation": {"max-examples": examples}})
    return schemathesis.openapi.from_wsgi("/v1/openapi.json", app, config=config)


json_api = load(30).exclude(path_regex="^/v1/text/")
text_api = load(6).include(path_regex="^/v1/text/")


@json_api.parametrize()
@settings(deadline=None, suppress_health_check=list(HealthCheck))
def test_json_api_never_answers_5xx(case):
    response = case.call()
    case.validate_response(response, checks=[not_a_server_error, response_schema_conformance])


@text_api.parametrize()
@settings(deadline=None, suppress_health_check=list(HealthCheck))
def test_text_form_never_answers_5xx(case):
    response = case.call()
    case.validate_response(response, checks=[not_a_server_error])
    if response.status_code >= 400:
        # the body is the spreadsheet error code, the message in a header
        assert response.text.startswith("#") and response.headers.get("x-trueband-error-message")

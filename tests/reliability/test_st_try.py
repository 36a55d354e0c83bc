import tempfile
from pathlib import Path

import pytest
import schemathesis
from hypothesis import HealthCheck, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import response_schema_conformance

from server.store import open_db, seed_demo_if_empty
from server.web.app import DEMO_PROJECT_PATH, create_app

from collections import Counter
STATS = Counter()
COUNT = {"n": 0}
DB_PATH = Path(tempfile.mkdtemp(prefix="probewise-fuzz-")) / "fuzz.db"
db = open_db(DB_PATH)
seed_demo_if_empty(db, DEMO_PROJECT_PATH)
db.close()
APP = create_app(DB_PATH, seed=False, extra_hosts=("testserver", "localhost"))
schema = schemathesis.openapi.from_asgi("/openapi.json", APP)

@schema.parametrize()
@settings(max_examples=50, deadline=None, suppress_health_check=list(HealthCheck))
def test_api(case):
    COUNT["n"] += 1
    r = case.call_and_validate(checks=[not_a_server_error, response_schema_conformance]); STATS[(case.operation.label, r.status_code)] += 1
    if r.status_code == 400: print("400!", case.as_curl_command(), r.text[:300])

def test_count():
    print("CASES", COUNT["n"]); [print(k, v) for k, v in sorted(STATS.items())]

from collections import Counter
STATS = Counter()
_orig = test_api

"""Access control, walked from the OpenAPI document: every operation in server/openapi.json is
called with no token, a wrong token, a read token and (for reads) no token on a server that
requires tokens for reads. Operations whose `security` is [{"bearer": []}] are writes or admin:
they must answer 401 without a valid token and 403 with a read token, and leave every stored
collection, shape and job as it was. Operations that inherit the document's optional security
are reads: open by default, 401 without a token when reads_require_token is set. Operations with
`security: []` are open always. A route added to the API without a matching OpenAPI entry fails
the route-table test (tests/server/api_test.cc), so this walk covers every route.

Usage: access_test.py WAYMARKD OPENAPI_JSON
"""
import json
import os
import shutil
import sys
import tempfile
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from waymarkd_harness import Checks, Waymarkd, call  # noqa: E402

WAYMARKD, OPENAPI = sys.argv[1], sys.argv[2]
WRITE = "access-write-token-0123456789"
READ = "access-read-token-0123456789"
check = Checks("access test")


def start(data_directory, **environment):
    server = Waymarkd(WAYMARKD, data_directory, dict(WAYMARK_WRITE_TOKENS=WRITE, WAYMARK_READ_TOKENS=READ, **environment))
    return server, server.port


# A body that would change data if the call were allowed, per operation.
BODIES = {
    ("PUT", "/v1/collections/{name}"): '{"landmarks": {"count": 16}}',
    ("POST", "/v1/collections/{name}/shapes"): '{"id": "intruder", "geometry": "LINESTRING (0 0, 9 9)"}\n',
    ("PUT", "/v1/collections/{name}/shapes/{id}"): '{"geometry": "LINESTRING (0 0, 9 9)"}',
    ("POST", "/v1/collections/{name}/refit"): "{}",
    ("POST", "/v1/collections/{name}/nearest"): '{"shape": "LINESTRING (0 0, 1 1)", "k": 2}',
    ("POST", "/v1/collections/{name}/within"): '{"shape": "LINESTRING (0 0, 1 1)", "radius": 1}',
    ("POST", "/v1/distance"): '{"a": "LINESTRING (0 0, 1 1)", "b": "LINESTRING (0 1, 1 1)"}',
}


def operations():
    with open(OPENAPI) as f:
        document = json.load(f)
    for path, item in document["paths"].items():
        for method, operation in item.items():
            if not isinstance(operation, dict):
                continue
            security = operation.get("security")
            kind = "open" if security == [] else "write" if security == [{"bearer": []}] else "read"
            yield method.upper(), path, kind


def concrete(path, name, target_id, job_id, new_collection=False):
    return (path.replace("{name}", "fresh" if new_collection else name).replace("{id}", job_id if "/jobs/" in path else target_id)
            .replace("{file}", "app.js"))


def state(port):
    """Everything a write could change, read with the write token."""
    collections = json.loads(call(port, "GET", "/v1/collections", token=WRITE)[1])["collections"]
    summary = {c["name"]: (c["stats"]["shapes"], c["landmarks"]["generation"], c["landmarks"]["checksum"]) for c in collections}
    shapes = json.loads(call(port, "GET", "/v1/collections/parts/shapes?limit=1000", token=WRITE)[1])["shapes"]
    jobs = json.loads(call(port, "GET", "/v1/jobs", token=WRITE)[1])["jobs"]
    return summary, shapes, [(j["id"], j["state"]) for j in jobs]


def main():
    work = tempfile.mkdtemp(prefix="waymark-access-")
    server, port = start(os.path.join(work, "open-reads"))
    ops = list(operations())
    check(len(ops) >= 20 and sum(1 for o in ops if o[2] == "write") >= 7, "the OpenAPI document lists the routes")
    try:
        call(port, "PUT", "/v1/collections/parts", '{"landmarks": {"count": 16}}', WRITE)
        call(port, "POST", "/v1/collections/parts/shapes",
             "".join('{"id": "s%d", "geometry": "LINESTRING (0 0, %d 1)"}\n' % (i, i + 1) for i in range(5)), WRITE)
        status, body = call(port, "POST", "/v1/collections/parts/refit", "{}", WRITE)
        job_id = json.loads(body)["id"] if status == 202 else "job-missing"
        for _ in range(200):  # let the refit finish so the job list is stable
            if json.loads(call(port, "GET", "/v1/jobs/" + job_id, token=WRITE)[1]).get("state") != "running":
                break
            time.sleep(0.05)
        before = state(port)
        for method, path, kind in ops:
            target = concrete(path, "parts", "s1", job_id, new_collection=(method == "PUT" and path == "/v1/collections/{name}"))
            body = BODIES.get((method, path))
            label = "%s %s" % (method, path)
            if kind == "write":
                status, _ = call(port, method, target, body)
                check(status == 401, label + " without a token: 401 (got %d)" % status)
                status, _ = call(port, method, target, body, token="not-a-valid-token-0123456789")
                check(status == 401, label + " with an unknown token: 401 (got %d)" % status)
                status, _ = call(port, method, target, body, token=READ)
                check(status == 403, label + " with a read token: 403 (got %d)" % status)
            else:
                status, _ = call(port, method, target, body)
                check(status not in (401, 403), label + " is readable without a token when reads are open (got %d)" % status)
        after = state(port)
        check(before == after, "no refused call changed collections, shapes or jobs")
    finally:
        server.stop()

    server, port = start(os.path.join(work, "open-reads"), WAYMARK_READS_REQUIRE_TOKEN="true")
    try:
        for method, path, kind in ops:
            if kind == "write":
                continue
            target = concrete(path, "parts", "s1", job_id)
            body = BODIES.get((method, path))
            label = "%s %s" % (method, path)
            status, _ = call(port, method, target, body)
            if kind == "open":
                check(status not in (401, 403), label + " stays open when reads need a token (got %d)" % status)
            else:
                check(status == 401, label + " needs a token when reads_require_token is set (got %d)" % status)
                status, _ = call(port, method, target, body, token=READ)
                check(status not in (401, 403), label + " is allowed with a read token (got %d)" % status)
    finally:
        server.stop()
        shutil.rmtree(work, ignore_errors=True)


main()
check.finish()

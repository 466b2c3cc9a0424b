"""Black-box tests of waymarkd: starts the real server on 127.0.0.1 (ephemeral port, temporary
data directory), drives it with Python's http.client, restarts it and reads everything back.

Usage: server_test.py WAYMARKD_BINARY
Standard library only. Exact answers are checked against the server's own /v1/distance on every
stored shape (a brute-force scan through the API); the distance routines themselves are checked
against GEOS, SciPy and Shapely in tests/sketch.
"""
import concurrent.futures
import http.client
import json
import os
import shutil
import signal
import socket
import ssl
import subprocess
import sys
import tempfile
import time

WAYMARKD = sys.argv[1]
WRITE = "test-write-token-0123456789"
READ = "test-read-token-0123456789"
failures = []
checks_run = [0]


def check(condition, message):
    checks_run[0] += 1
    if not condition:
        failures.append(message)
        print("FAIL:", message, flush=True)


class Server:
    def __init__(self, data_directory, *flags, tls=None):
        self.tls = tls
        environment = dict(os.environ, WAYMARK_WRITE_TOKENS=WRITE, WAYMARK_READ_TOKENS=READ)
        arguments = [WAYMARKD, "--data-directory", data_directory, "--port", "0"]
        self.process = subprocess.Popen(arguments + list(flags), stdout=subprocess.PIPE, stderr=subprocess.STDOUT,
                                        env=environment, text=True)
        self.log = []
        deadline = time.time() + 30
        self.port = None
        while time.time() < deadline and self.port is None:
            line = self.process.stdout.readline()
            if not line:
                break
            self.log.append(line)
            if "listening on" in line:
                self.port = int(line.rsplit(":", 1)[1])
        assert self.port, "waymarkd did not start:\n" + "".join(self.log)
        # Drain the log in the background so the server never blocks on a full pipe.
        import threading
        threading.Thread(target=self._drain, daemon=True).start()
        while self.call("GET", "/readyz")[0] != 200:
            assert time.time() < deadline, "waymarkd did not become ready"
            time.sleep(0.05)

    def _drain(self):
        for line in self.process.stdout:
            self.log.append(line)

    def connection(self):
        if self.tls:
            context = ssl.create_default_context(cafile=self.tls)
            context.check_hostname = False
            return http.client.HTTPSConnection("127.0.0.1", self.port, context=context, timeout=30)
        return http.client.HTTPConnection("127.0.0.1", self.port, timeout=30)

    def call(self, method, path, body=None, token=None, raw=None, connection=None, headers=None):
        own = connection is None
        connection = connection or self.connection()
        all_headers = dict(headers or {})
        if token:
            all_headers["Authorization"] = "Bearer " + token
        data = raw if raw is not None else (json.dumps(body) if body is not None else None)
        connection.request(method, path, body=data, headers=all_headers)
        response = connection.getresponse()
        text = response.read().decode()
        if own:
            connection.close()
        try:
            parsed = json.loads(text) if response.getheader("Content-Type", "").startswith("application/json") else text
        except json.JSONDecodeError:
            parsed = text
        return response.status, parsed

    def stop(self):
        self.process.send_signal(signal.SIGTERM)
        code = self.process.wait(timeout=30)
        return code


def error_code(reply):
    return reply.get("error", {}).get("code") if isinstance(reply, dict) else None


def expect_error(server, method, path, body, status, code, token=WRITE, raw=None, where=None, label=""):
    got_status, reply = server.call(method, path, body, token=token, raw=raw)
    check(got_status == status and error_code(reply) == code,
          f"{label or method + ' ' + path}: expected {status} {code}, got {got_status} {reply}")
    if where is not None:
        check(reply.get("error", {}).get("where", "").startswith(where),
              f"{label}: expected where starting {where!r}, got {reply}")
    return reply


# Invented parts: brackets (L shapes), gaskets (rings), clips (open strokes), seeded.
def catalogue(count, seed=7):
    import random
    rng = random.Random(seed)
    lines = []
    for i in range(count):
        kind = i % 3
        if kind == 0:
            w, h, t = rng.uniform(20, 60), rng.uniform(20, 50), rng.uniform(3, 8)
            geometry = f"POLYGON ((0 0, {w:.3f} 0, {w:.3f} {t:.3f}, {t:.3f} {t:.3f}, {t:.3f} {h:.3f}, 0 {h:.3f}, 0 0))"
        elif kind == 1:
            r = rng.uniform(10, 30)
            points = [[r * (1 + 0.1 * rng.random()) * __import__("math").cos(a / 12 * 6.283185307179586),
                       r * (1 + 0.1 * rng.random()) * __import__("math").sin(a / 12 * 6.283185307179586)] for a in range(12)]
            geometry = {"type": "Polygon", "coordinates": [points + [points[0]]]}
        else:
            x = 0.0
            points = []
            for _ in range(8):
                x += rng.uniform(1, 5)
                points.append([x, rng.uniform(-3, 3)])
            geometry = points
        lines.append({"id": f"P-{i:04d}", "geometry": geometry,
                      "metadata": {"family": ["bracket", "gasket", "clip"][kind], "rev": i % 4}})
    return lines


def shapes_snapshot(server, name):
    shapes, after = [], ""
    while True:
        status, page = server.call("GET", f"/v1/collections/{name}/shapes?limit=500&after={after}")
        assert status == 200, page
        shapes += page["shapes"]
        if page["next_after"] is None:
            return shapes
        after = page["next_after"]


def main():
    directory = tempfile.mkdtemp(prefix="waymarkd-test-")
    data = os.path.join(directory, "data")
    try:
        server = Server(data, "--max-body-bytes", "65536", "--read-timeout-ms", "1500", "--bulk-batch-size", "100",
                        "--approximate-index-minimum-size", "200")
        run_api_checks(server, directory)
        run_approximate_index_checks(server)
        run_refit_checks(server)
        before = shapes_snapshot(server, "parts")
        query = {"shape": "LINESTRING (0 0, 10 2, 20 -1, 30 0)", "k": 5, "mode": "exact"}
        _, answer_before = server.call("POST", "/v1/collections/parts/nearest", query)
        check(server.stop() == 0, "SIGTERM: exit status 0")
        check(any("stopped" in line for line in server.log), "a shutdown log line")

        # Restart: everything reads back the same, and the same query gives the same answer.
        server = Server(data, "--max-concurrent-queries", "1", "--worker-threads", "1")
        check(shapes_snapshot(server, "parts") == before, "restart: every shape and its metadata read back")
        _, described = server.call("GET", "/v1/collections/parts")
        check(described["landmarks"]["generation"] == 2, f"restart: refitted generation kept: {described['landmarks']}")
        # The float copies of the stored shapes are made after the start, in the background.
        deadline = time.time() + 20
        while described["stats"].get("making_resident_copies") is True and time.time() < deadline:
            time.sleep(0.05)
            _, described = server.call("GET", "/v1/collections/parts")
        check(described["stats"].get("making_resident_copies") is False and described["stats"]["resident_copy_bytes"] > 0,
              f"restart: float copies made in the background: {described['stats']}")
        _, answer_after = server.call("POST", "/v1/collections/parts/nearest", query)
        check([(r["id"], r["distance"]) for r in answer_after["results"]] ==
              [(r["id"], r["distance"]) for r in answer_before["results"]], "restart: same answer")
        run_overload_check(server)
        check(server.stop() == 0, "second SIGTERM: exit status 0")

        run_tls_check(directory)
    finally:
        shutil.rmtree(directory, ignore_errors=True)
    if failures:
        print(f"{len(failures)} checks failed")
        sys.exit(1)
    print(f"all {checks_run[0]} server checks passed")


def check_exact_against_brute_force(server, label):
    """Exact kNN equals a brute-force scan through /v1/distance over every stored shape."""
    stored = shapes_snapshot(server, "parts")
    query_shape = "LINESTRING (0 0, 10 2, 20 -1, 30 0)"
    for metric in ["hausdorff", "frechet"]:
        status, answer = server.call("POST", "/v1/collections/parts/nearest",
                                     {"shape": query_shape, "k": 5, "metric": metric, "mode": "exact"})
        check(status == 200 and answer["certified"], f"{label}exact {metric}: {status} {answer}")
        distances = []
        for shape in stored:
            if metric == "frechet" and shape["geometry"]["type"].startswith("Multi"):
                continue
            s, d = server.call("POST", "/v1/distance", {"a": query_shape, "b": shape["geometry"], "metric": metric,
                                                        "frame": "unit"})
            if s == 200:
                distances.append((d["distance"], shape["id"]))
        distances.sort()
        expected = [(round(d, 9), i) for d, i in distances[:5]]
        got = [(round(r["distance"], 9), r["id"]) for r in answer["results"]]
        check(got == expected, f"{label}exact {metric} equals brute force: {got} vs {expected}")
        check(answer["stats"]["exact_evaluations"] < len(stored), f"{label}exact {metric}: the bounds pruned")
        check(0 < answer["stats"]["index_milliseconds"] <= answer["stats"]["milliseconds"],
              f"{label}exact {metric}: the index's share of the time: {answer['stats']}")


def run_approximate_index_checks(server):
    """A graph collection: its approximate index is built in the background (the server runs
    with --approximate-index-minimum-size 200), fast answers come from it uncertified, exact
    answers stay certified, and a bad index kind is refused."""
    expect_error(server, "PUT", "/v1/collections/bogus", {"index": "tree"}, 400, "invalid_argument", where="index",
                 label="unknown index kind")
    for kind in ["graph", "partitioned"]:
        name = "drawings-" + kind
        status, created = server.call("PUT", f"/v1/collections/{name}", {"index": kind, "landmarks": {"count": 32}},
                                      token=WRITE)
        check(status == 201 and created["index"] == kind and created["stats"]["approximate_index"]["built"] is False,
              f"create {kind}: {status} {created}")
        body = "\n".join(json.dumps(entry) for entry in catalogue(400, seed=11)) + "\n"
        status, reply = server.call("POST", f"/v1/collections/{name}/shapes", raw=body, token=WRITE)
        check(status == 200 and reply["accepted"] == 400, f"{kind}: bulk {status} {reply}")
        deadline = time.time() + 60
        while time.time() < deadline:
            status, described = server.call("GET", f"/v1/collections/{name}")
            # Built at 200 shapes (bulk batches of 100), then rebuilt once the fresh ones pass 10%.
            if described["stats"]["approximate_index"]["built_size"] == 400:
                break
            time.sleep(0.05)
        approximate = described["stats"]["approximate_index"]
        check(approximate["built"] and approximate["built_size"] == 400 and approximate["fresh"] == 0,
              f"{kind}: built in the background: {approximate}")
        query = {"id": "P-0007", "k": 5}
        status, fast = server.call("POST", f"/v1/collections/{name}/nearest", query)
        status_exact, exact = server.call("POST", f"/v1/collections/{name}/nearest", dict(query, mode="exact"))
        check(status == 200 and not fast["certified"] and len(fast["results"]) == 5, f"{kind}: fast answer {fast}")
        check(status_exact == 200 and exact["certified"] and len(exact["results"]) == 5, f"{kind}: exact answer {exact}")
        check(fast["results"][0]["id"] == exact["results"][0]["id"], f"{kind}: fast and exact agree on the nearest")
        status, _ = server.call("DELETE", f"/v1/collections/{name}", token=WRITE)
        check(status == 200, f"{kind}: drop")


def run_refit_checks(server):
    """Landmark refit as a background job: progress on /v1/jobs, a new fitted generation,
    exact answers unchanged, and the errors of the job routes."""
    expect_error(server, "POST", "/v1/collections/parts/refit", {}, 401, "unauthenticated", token=None,
                 label="refit without a token")
    expect_error(server, "POST", "/v1/collections/parts/refit", {}, 403, "forbidden", token=READ,
                 label="refit with a read token")
    expect_error(server, "POST", "/v1/collections/parts/refit", {"landmarks": 3}, 400, "invalid_argument",
                 where="landmarks", label="refit with an unknown field")
    expect_error(server, "POST", "/v1/collections/parts/refit", {"sample_size": 1}, 400, "invalid_argument",
                 where="sample_size", label="refit with a sample of one")
    expect_error(server, "POST", "/v1/collections/nothing/refit", {}, 404, "not_found", label="refit unknown collection")
    expect_error(server, "GET", "/v1/jobs/refit-999999", None, 404, "not_found", label="unknown job")
    expect_error(server, "DELETE", "/v1/jobs/refit-000001", None, 401, "unauthenticated", token=None,
                 label="cancel without a token")

    status, job = server.call("POST", "/v1/collections/parts/refit", {"landmark_count": 48, "sample_size": 300},
                              token=WRITE)
    check(status == 202 and job["state"] in ("running", "succeeded") and job["kind"] == "landmark_refit" and
          job["collection"] == "parts", f"refit started: {status} {job}")
    deadline = time.time() + 60
    while job.get("state") == "running" and time.time() < deadline:
        time.sleep(0.05)
        status, job = server.call("GET", "/v1/jobs/" + job["id"])
        check(status == 200 and 0 <= job["fraction"] <= 1 and job["shapes_done"] <= job["shapes_total"],
              f"job progress: {job}")
    check(job.get("state") == "succeeded" and job.get("generation") == 2 and job["fraction"] == 1 and
          job["shapes_done"] == job["shapes_total"] > 0, f"refit finished: {job}")
    status, listing = server.call("GET", "/v1/jobs")
    check(status == 200 and [j["id"] for j in listing["jobs"]] == [job["id"]], f"job list: {listing}")
    status, described = server.call("GET", "/v1/collections/parts")
    landmarks = described["landmarks"]
    check(landmarks["generation"] == 2 and landmarks["layout"] == "fitted" and landmarks["count"] == 48,
          f"collection after refit: {landmarks}")
    status, cancelled = server.call("DELETE", "/v1/jobs/" + job["id"], token=WRITE)
    check(status == 200 and cancelled["state"] == "succeeded", f"cancelling a finished job changes nothing: {cancelled}")
    check_exact_against_brute_force(server, "after refit: ")


def run_api_checks(server, directory):
    status, reply = server.call("GET", "/healthz")
    check(status == 200 and reply == {"status": "up"}, f"healthz: {status} {reply}")

    # Collections: create, conflicts, tokens, names, settings.
    status, created = server.call("PUT", "/v1/collections/parts", {"landmarks": {"layout": "grid", "count": 64},
                                                                    "frame": "unit"}, token=WRITE)
    check(status == 201 and created["landmarks"]["count"] == 64, f"create: {status} {created}")
    expect_error(server, "PUT", "/v1/collections/parts", {}, 409, "already_exists", label="create twice")
    expect_error(server, "PUT", "/v1/collections/other", {}, 401, "unauthenticated", token=None, label="create, no token")
    expect_error(server, "PUT", "/v1/collections/other", {}, 401, "unauthenticated", token="wrong-token-0123456789",
                 label="create, wrong token")
    expect_error(server, "PUT", "/v1/collections/other", {}, 403, "forbidden", token=READ, label="create, read token")
    expect_error(server, "PUT", "/v1/collections/..", {}, 400, "invalid_argument", where="name", label="name ..")
    expect_error(server, "PUT", "/v1/collections/a%2Fb", {}, 400, "invalid_argument", where="name", label="name a/b")
    expect_error(server, "PUT", "/v1/collections/other", {"landmark": {}}, 400, "invalid_argument", where="landmark",
                 label="unknown field")
    expect_error(server, "PUT", "/v1/collections/other", {"landmarks": {"count": "many"}}, 400, "invalid_argument",
                 where="landmarks.count", label="wrong type")
    expect_error(server, "PUT", "/v1/collections/other", {"frame": "centered"}, 400, "invalid_argument",
                 where="landmarks.domain", label="centered frame without domain")
    status, listing = server.call("GET", "/v1/collections")
    check(status == 200 and [c["name"] for c in listing["collections"]] == ["parts"], f"list: {listing}")

    # One shape in each input format, read back unchanged.
    formats = {
        "wkt": "POLYGON ((0 0, 40 0, 40 6, 6 6, 6 30, 0 30, 0 0))",
        "geojson": {"type": "LineString", "coordinates": [[0, 0], [5, 1], [9, -2]]},
        "svg": "M 0 0 L 10 0 L 10 10 Z",
        "arrays": [[0, 0], [3, 4], [6, 0]],
    }
    for name, geometry in formats.items():
        status, reply = server.call("PUT", f"/v1/collections/parts/shapes/fmt-{name}",
                                    {"geometry": geometry, "metadata": {"format": name}}, token=WRITE)
        check(status == 200, f"put {name}: {status} {reply}")
    status, reply = server.call("GET", "/v1/collections/parts/shapes/fmt-geojson")
    check(status == 200 and reply["geometry"]["coordinates"] == [[0, 0], [5, 1], [9, -2]] and
          reply["metadata"] == {"format": "geojson"}, f"get geojson: {reply}")
    status, reply = server.call("GET", "/v1/collections/parts/shapes/fmt-svg")
    check(status == 200 and reply["geometry"]["type"] == "Polygon", f"get svg: {reply}")

    # Bulk NDJSON, sent with chunked transfer: good lines stored, each bad one named by line.
    lines = [json.dumps(entry) for entry in catalogue(600)]
    lines.insert(10, "{not json")
    lines.insert(20, json.dumps({"id": "bad-nan", "geometry": "LINESTRING (0 0, 1 nan)"}))
    lines.insert(30, json.dumps({"geometry": "LINESTRING (0 0, 1 1)"}))
    lines.insert(40, json.dumps({"id": "bad-meta", "geometry": "LINESTRING (0 0, 1 1)", "metadata": [1]}))
    lines.insert(50, "")
    body = ("\n".join(lines) + "\n").encode()
    connection = server.connection()
    chunks = (body[i:i + 4096] for i in range(0, len(body), 4096))
    connection.request("POST", "/v1/collections/parts/shapes", body=chunks, encode_chunked=True,
                       headers={"Authorization": "Bearer " + WRITE, "Content-Type": "application/x-ndjson"})
    response = connection.getresponse()
    reply = json.loads(response.read())
    connection.close()
    check(response.status == 200 and reply["accepted"] == 600 and reply["rejected"] == 4,
          f"bulk: {response.status} {reply}")
    rejected_lines = sorted(r["line"] for r in reply.get("rejections", []))
    check(rejected_lines == [11, 21, 31, 41], f"bulk: rejected lines {rejected_lines}")
    by_line = {r["line"]: r for r in reply.get("rejections", [])}
    check(by_line.get(21, {}).get("id") == "bad-nan" and "geometry" in by_line.get(21, {}).get("error", {}).get("where", ""),
          f"bulk: the NaN line names its id and the geometry position: {by_line.get(21)}")
    check(by_line.get(41, {}).get("error", {}).get("where") == "metadata", f"bulk: metadata line {by_line.get(41)}")
    status, described = server.call("GET", "/v1/collections/parts")
    check(described["stats"]["shapes"] == 604 and described["stats"]["last_write"], f"stats: {described['stats']}")

    # Bulk NDJSON with a Content-Length, about 1.3 MB: a body that takes many socket reads
    # arrives whole, every full-precision coordinate read back as sent.
    import random
    rng = random.Random(11)
    strokes = {f"stroke-{i}": [[rng.uniform(-100, 100), rng.uniform(-100, 100)] for _ in range(300)] for i in range(100)}
    body = "".join(json.dumps({"id": stroke_id, "geometry": {"type": "LineString", "coordinates": coordinates}}) + "\n"
                   for stroke_id, coordinates in strokes.items())
    status, created = server.call("PUT", "/v1/collections/strokes", {}, token=WRITE)
    check(status == 201, f"create strokes: {status} {created}")
    status, reply = server.call("POST", "/v1/collections/strokes/shapes", raw=body, token=WRITE,
                                headers={"Content-Type": "application/x-ndjson"})
    check(status == 200 and reply["accepted"] == 100 and reply["rejected"] == 0, f"bulk with a length: {status} {reply}")
    for stroke_id in ("stroke-0", "stroke-57", "stroke-99"):
        status, stored = server.call("GET", f"/v1/collections/strokes/shapes/{stroke_id}")
        check(status == 200 and stored["geometry"]["coordinates"] == strokes[stroke_id], f"read back {stroke_id}")
    status, reply = server.call("DELETE", "/v1/collections/strokes", token=WRITE)
    check(status == 200, f"drop strokes: {status} {reply}")

    check_exact_against_brute_force(server, "")
    query_shape = "LINESTRING (0 0, 10 2, 20 -1, 30 0)"

    # By stored id (excludes itself), range, filter.
    status, answer = server.call("POST", "/v1/collections/parts/nearest", {"id": "P-0003", "k": 3})
    check(status == 200 and "P-0003" not in [r["id"] for r in answer["results"]] and len(answer["results"]) == 3,
          f"by id: {answer}")
    status, answer = server.call("POST", "/v1/collections/parts/within", {"shape": query_shape, "radius": 0.05})
    check(status == 200 and answer["certified"] and all(r["distance"] <= 0.05 for r in answer["results"]),
          f"within: {answer}")
    status, answer = server.call("POST", "/v1/collections/parts/nearest",
                                 {"shape": query_shape, "k": 5, "filter": {"family": "gasket"}, "mode": "exact"})
    check(status == 200 and answer["results"] and all(r["metadata"]["family"] == "gasket" for r in answer["results"]),
          f"filter: {answer}")
    status, distance = server.call("POST", "/v1/distance", {"a": "LINESTRING (0 0, 1 0)", "b": "LINESTRING (0 1, 1 1)"})
    check(status == 200 and abs(distance["distance"] - 1) < 1e-12 and abs(distance["to"][1] - 1) < 1e-12,
          f"distance with witness: {distance}")

    # Bad requests: exact status and code, and the stored data unchanged afterwards.
    before = shapes_snapshot(server, "parts")
    nearest = "/v1/collections/parts/nearest"
    expect_error(server, "POST", nearest, None, 400, "invalid_argument", raw='{"shape": "LINESTRING (0 0, 1 1)",',
                 where="line 1, column", label="malformed JSON")
    expect_error(server, "POST", nearest, {"shape": "LINESTRING (0 0, 1 1)", "k": "ten"}, 400, "invalid_argument",
                 where="k", label="k of the wrong type")
    expect_error(server, "POST", nearest, {"shape": "LINESTRING (0 0, 1 1)", "metric": "manhattan"}, 400,
                 "invalid_argument", where="metric", label="unsupported metric")
    expect_error(server, "POST", nearest, {"shape": "MULTILINESTRING ((0 0, 1 1), (2 2, 3 3))", "metric": "frechet"},
                 422, "not_applicable", label="Fréchet on two strokes")
    expect_error(server, "POST", nearest, {"shape": "LINESTRING (0 0, 1 1)", "k": 0}, 400, "invalid_argument",
                 where="k", label="k = 0")
    expect_error(server, "POST", nearest, {"shape": "LINESTRING (0 0, 1 1)", "k": 100000}, 400, "invalid_argument",
                 where="k", label="k over max_k")
    expect_error(server, "POST", nearest, {"shape": "LINESTRING (0 0 1, 1 1)"}, 400, "invalid_argument",
                 where="shape: line 1", label="bad WKT")
    expect_error(server, "POST", "/v1/collections/nothing/nearest", {"shape": "LINESTRING (0 0, 1 1)"}, 404,
                 "not_found", label="unknown collection")
    expect_error(server, "GET", "/v1/collections/parts/shapes/no-such-shape", None, 404, "not_found", label="unknown shape")
    expect_error(server, "GET", "/v1/nowhere", None, 404, "not_found", label="unknown route")
    expect_error(server, "PATCH", "/v1/collections/parts", {}, 405, "method_not_allowed", label="PATCH")
    expect_error(server, "PUT", "/v1/collections/parts/shapes/x", {"geometry": "LINESTRING (0 0, 1 1)"}, 401,
                 "unauthenticated", token=None, label="put shape without a token")
    expect_error(server, "DELETE", "/v1/collections/parts", None, 403, "forbidden", token=READ,
                 label="drop with a read token")
    expect_error(server, "PUT", "/v1/collections/parts/shapes/big", None, 413, "too_large",
                 raw=json.dumps({"geometry": [[i, i % 7] for i in range(10000)]}), label="oversized body")
    expect_error(server, "PUT", "/v1/collections/parts/shapes/x", {"geometry": "LINESTRING (0 0, 1 1)", "metadata": 3},
                 400, "invalid_argument", where="metadata", label="metadata not an object")
    expect_error(server, "PUT", "/v1/collections/parts/shapes/x", {"geometry": {"type": "Circle"}}, 400,
                 "invalid_argument", where="geometry", label="unknown GeoJSON type")
    check(shapes_snapshot(server, "parts") == before, "bad requests left the stored data unchanged")

    # Upsert and delete.
    status, _ = server.call("PUT", "/v1/collections/parts/shapes/P-0001", {"geometry": "LINESTRING (0 0, 5 5)",
                                                                         "metadata": {"rev": 9}}, token=WRITE)
    status, reply = server.call("GET", "/v1/collections/parts/shapes/P-0001")
    check(reply["metadata"] == {"rev": 9} and reply["geometry"]["type"] == "LineString", f"upsert: {reply}")
    status, reply = server.call("DELETE", "/v1/collections/parts/shapes/P-0002", token=WRITE)
    check(status == 200, f"delete: {status} {reply}")
    expect_error(server, "DELETE", "/v1/collections/parts/shapes/P-0002", None, 404, "not_found", label="delete twice")

    # Keep-alive: several requests on one connection.
    connection = server.connection()
    for _ in range(3):
        status, _ = server.call("GET", "/healthz", connection=connection)
        check(status == 200, "keep-alive request")
    connection.close()

    # "Expect: 100-continue" (curl sends it for large uploads) gets the interim reply at once,
    # then the real one once the body arrives.
    body = json.dumps({"shape": "LINESTRING (0 0, 10 2, 20 -1, 30 0)", "k": 1}).encode()
    sock = socket.create_connection(("127.0.0.1", server.port))
    sock.settimeout(5)
    sock.sendall(b"POST /v1/collections/parts/nearest HTTP/1.1\r\nHost: x\r\nExpect: 100-continue\r\n"
                 b"Content-Type: application/json\r\nContent-Length: " + str(len(body)).encode() + b"\r\n\r\n")
    started = time.time()
    try:
        interim = sock.recv(4096)
    except socket.timeout:
        interim = b""
    check(interim.startswith(b"HTTP/1.1 100 Continue") and time.time() - started < 0.5, f"100-continue: {interim!r}")
    sock.sendall(body)
    final = b""
    while b"\r\n\r\n" not in final:
        chunk = sock.recv(4096)
        if not chunk:
            break
        final += chunk
    check(final.startswith(b"HTTP/1.1 200"), f"100-continue: then the answer: {final[:80]!r}")
    sock.close()

    # A slow-drip request is cut off by read_timeout_ms (1.5 s here).
    sock = socket.create_connection(("127.0.0.1", server.port))
    sock.sendall(b"POST /v1/collections/parts/nearest HTTP/1.1\r\nHost: x\r\nContent-Length: 100\r\n\r\n{")
    sock.settimeout(10)
    started = time.time()
    try:
        answer = sock.recv(4096)
    except socket.timeout:
        answer = None
    check(answer is not None and time.time() - started < 8 and (answer == b"" or b"408" in answer.split(b"\r\n")[0]),
          f"slow drip cut off: {answer!r}")
    sock.close()

    # Metrics in the Prometheus text format (bulk lines accepted: 600 parts and 100 strokes).
    status, text = server.call("GET", "/metrics")
    check(status == 200 and 'waymark_http_requests_total{method="POST",route="/v1/collections/{name}/nearest",status="200"}'
          in text and 'waymark_collection_shapes{collection="parts"} 603' in text and
          'waymark_ingest_shapes_total{outcome="accepted"} 700' in text, "metrics:\n" + text[:2000])
    # Memory gauges: resident size against the kernel's own figure (/proc/PID/status, read
    # right after), the shared block cache's configured 512 MiB, unflushed writes in memtables.
    gauges = {line.split()[0]: float(line.split()[1]) for line in text.splitlines() if line and not line.startswith("#")}
    with open("/proc/%d/status" % server.process.pid) as f:
        kernel_rss = next(int(l.split()[1]) * 1024 for l in f if l.startswith("VmRSS:"))
    check(abs(gauges.get("process_resident_memory_bytes", 0) - kernel_rss) < 0.2 * kernel_rss,
          "resident memory gauge %s vs kernel %d" % (gauges.get("process_resident_memory_bytes"), kernel_rss))
    check(gauges.get("waymark_block_cache_capacity_bytes") == 512 * 1024 * 1024, "block cache capacity gauge")
    # Float copies of the 603 stored shapes: at least a 7-word header and one 8-byte vertex each.
    check(gauges.get("waymark_resident_copy_capacity_bytes") == 1024 * 1024 * 1024, "float copy capacity gauge")
    copies = gauges.get('waymark_collection_resident_copy_bytes{collection="parts"}', 0)
    check(copies >= 603 * (28 + 8) and gauges.get("waymark_resident_copy_bytes", 0) >= copies,
          "float copy gauges %s" % copies)
    check(gauges.get('waymark_collection_memtable_bytes{collection="parts"}', 0) > 0, "memtable gauge")

    # A second collection can be created and dropped.
    status, _ = server.call("PUT", "/v1/collections/scratch", {"landmarks": {"count": 16, "layout": "random"}}, token=WRITE)
    check(status == 201, "create scratch")
    status, _ = server.call("DELETE", "/v1/collections/scratch", token=WRITE)
    check(status == 200, "drop scratch")
    expect_error(server, "GET", "/v1/collections/scratch", None, 404, "not_found", label="dropped collection")


def run_overload_check(server):
    # max_concurrent_queries = 1, one worker: concurrent slow queries get 429, none fail otherwise.
    body = {"shape": "LINESTRING (0 0, 10 2, 20 -1, 30 0)", "k": 1000, "metric": "sketch", "mode": "exact"}

    def one(_):
        return server.call("POST", "/v1/collections/parts/nearest", body)

    with concurrent.futures.ThreadPoolExecutor(16) as pool:
        results = list(pool.map(one, range(64)))
    statuses = [status for status, _ in results]
    check(set(statuses) <= {200, 429} and 429 in statuses and 200 in statuses, f"overload: statuses {sorted(set(statuses))}")
    overloaded = [reply for status, reply in results if status == 429]
    check(all(error_code(reply) == "overloaded" for reply in overloaded), "overload: code overloaded")


def run_tls_check(directory):
    certificate, key = os.path.join(directory, "cert.pem"), os.path.join(directory, "key.pem")
    made = subprocess.run(["openssl", "req", "-x509", "-newkey", "rsa:2048", "-nodes", "-keyout", key, "-out", certificate,
                           "-days", "1", "-subj", "/CN=127.0.0.1"], capture_output=True)
    if made.returncode != 0:
        check(False, "openssl could not make a test certificate: " + made.stderr.decode())
        return
    server = Server(os.path.join(directory, "tls-data"), "--tls-certificate-file", certificate,
                    "--tls-private-key-file", key, tls=certificate)
    status, reply = server.call("GET", "/healthz")
    check(status == 200 and reply == {"status": "up"}, f"TLS healthz: {status} {reply}")
    status, _ = server.call("PUT", "/v1/collections/secure", {}, token=WRITE)
    check(status == 201, "TLS create")
    check(server.stop() == 0, "TLS server stops cleanly")


if __name__ == "__main__":
    main()

"""The `waymark` server commands against a real waymarkd (127.0.0.1, ephemeral port, temporary
data directory): ingest a folder of GeoJSON, WKT, SVG and NDJSON files with some bad ones, resume
after the loader is killed with SIGKILL, query, print stats, export and compare the export with the
input; then the failure paths (unreachable server, refused token) and the retries on 503, the
latter against a stand-in server that refuses the first attempts.

Usage: cli_server_test.py WAYMARKD WAYMARK
Run with Debian's /usr/bin/python3: Shapely (python3-shapely) turns the catalogue's WKT into
GeoJSON, so the export is compared with coordinates read by a parser outside the project.
"""
import http.server
import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time

import shapely.geometry
import shapely.wkt

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from waymarkd_harness import Checks, Waymarkd, call as raw_call  # noqa: E402

WAYMARKD, WAYMARK = sys.argv[1], sys.argv[2]
TOKEN = "cli-test-write-token-0123456789"
check = Checks("cli server test")


def start_server(data_directory):
    server = Waymarkd(WAYMARKD, data_directory, {"WAYMARK_WRITE_TOKENS": TOKEN})
    return server, server.port


def call(port, method, path, body=None):
    status, text = raw_call(port, method, path, body if body is None or isinstance(body, (bytes, str)) else json.dumps(body),
                            TOKEN)
    return status, json.loads(text) if text else None


def cli(port, *arguments, token=TOKEN, server=None):
    environment = dict(os.environ, WAYMARK_SERVER=server or "http://127.0.0.1:%d" % port)
    environment.pop("WAYMARK_TOKEN", None)
    if token is not None:
        environment["WAYMARK_TOKEN"] = token
    result = subprocess.run([WAYMARK] + list(arguments), capture_output=True, text=True, env=environment, timeout=300)
    return result.returncode, result.stdout, result.stderr


def catalogue(count, seed):
    out = subprocess.run([WAYMARK, "demo-catalogue", "--count", str(count), "--seed", str(seed)], capture_output=True,
                         text=True, check=True).stdout
    return [json.loads(line) for line in out.splitlines()]


def geojson_of(wkt):
    """GeoJSON geometry of a WKT string, via Shapely, with lists instead of tuples."""
    return json.loads(json.dumps(shapely.geometry.mapping(shapely.wkt.loads(wkt))))


def write_inputs(folder):
    """A folder as a CAD export might leave it: good files of each kind and some bad ones.
    Returns {id: (geometry as GeoJSON or None, metadata)} for every shape that must be stored."""
    expected = {}
    os.makedirs(os.path.join(folder, "flanges"))
    parts = catalogue(300, 11)
    for p in parts:
        p["geometry"] = geojson_of(p["geometry"])
    # GeoJSON with ids in a property; one feature without geometry.
    features = [{"type": "Feature", "geometry": p["geometry"], "properties": dict(p["metadata"], sku=p["id"])} for p in parts[:200]]
    features.append({"type": "Feature", "geometry": None, "properties": {"sku": "NO-GEOMETRY"}})
    with open(os.path.join(folder, "catalogue.geojson"), "w") as f:
        json.dump({"type": "FeatureCollection", "features": features}, f)
    for p in parts[:200]:
        expected[p["id"]] = (p["geometry"], dict(p["metadata"], sku=p["id"]))
    # GeoJSON every feature of which has a geometry, written across lines with a member the
    # loader passes over (bbox): sent on as text, unparsed; feature 3's unclosed ring is
    # rejected by the server under this file and feature.
    brackets = []
    for i, p in enumerate(catalogue(6, 12)):
        sku = "BR-%02d" % i
        geometry = geojson_of(p["geometry"]) if i != 2 else {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1]]]}
        brackets.append({"type": "Feature", "bbox": [0, 0, 1, 1], "geometry": geometry,
                         "properties": dict(p["metadata"], sku=sku, drawing={"sheet": i, "rev": "B"})})
        if i != 2:
            expected[sku] = (geometry, brackets[-1]["properties"])
    with open(os.path.join(folder, "flanges", "brackets.geojson"), "w") as f:
        json.dump({"type": "FeatureCollection", "name": "brackets", "features": brackets}, f, indent=2)
    # NDJSON in a subfolder; line 4 is broken JSON, line 7 has a bad geometry (an unclosed ring),
    # line 9 a member of its own.
    lines = []
    for i, p in enumerate(parts[200:300]):
        lines.append(json.dumps(p))
        expected[p["id"]] = (p["geometry"], p["metadata"])
    lines[3] = '{"id": "BROKEN", "geometry": '
    del expected[parts[203]["id"]]
    bad_ring = {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1]]]}
    lines[6] = json.dumps({"id": parts[206]["id"], "geometry": bad_ring})
    del expected[parts[206]["id"]]
    # A member the server does not take is left out (other lines are sent as read).
    lines[8] = json.dumps(dict(parts[208], note="from the old export"))
    # Line 11 has the plain form the loader sends unread, but a trailing comma inside its
    # geometry: the server's rejection still names this file and line.
    lines[10] = ('{"id": "%s", "geometry": {"type": "LineString", "coordinates": [[0, 0], [1, 1]], }}' %
                 parts[210]["id"])
    del expected[parts[210]["id"]]
    with open(os.path.join(folder, "flanges", "more.ndjson"), "w") as f:
        f.write("\n".join(lines) + "\n")
    # WKT lines: id TAB wkt TAB metadata; a comment; a bare WKT line; a bad one.
    with open(os.path.join(folder, "sketches.wkt"), "w") as f:
        f.write("# doodles from the whiteboard\n")
        f.write('hook-1\tLINESTRING (0 0, 10 0, 10 5)\t{"author": "ana"}\n')
        f.write("POLYGON ((0 0, 4 0, 4 3, 0 0))\n")
        f.write("zigzag LINESTRING (0 0, 1 1, 2 0, 3 1)\n")
        f.write("broken\tPOLYGON ((0 0, 1 0\n")
    expected["hook-1"] = ({"type": "LineString", "coordinates": [[0, 0], [10, 0], [10, 5]]}, {"author": "ana"})
    expected["sketches-3"] = ({"type": "Polygon", "coordinates": [[[0, 0], [4, 0], [4, 3], [0, 0]]]}, {})
    expected["zigzag"] = ({"type": "LineString", "coordinates": [[0, 0], [1, 1], [2, 0], [3, 1]]}, {})
    # SVG: a path with an id, a polyline without, one under a transform, a bad polygon.
    with open(os.path.join(folder, "panel.svg"), "w") as f:
        f.write('<?xml version="1.0"?>\n<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 100 100">\n'
                '  <path id="slot" d="M 10 10 L 40 10 L 40 20 L 10 20 Z"/>\n'
                '  <polyline points="0,0 5,5 10,0"/>\n'
                '  <g transform="rotate(45)"><polygon points="0,0 9,0 9,9"/></g>\n'
                '  <polygon points="1,2 3"/>\n'
                '</svg>\n')
    expected["slot"] = (None, {})
    expected["panel-2"] = (None, {})
    # Not JSON at all, and a file of another type in the folder (ignored, not an error).
    with open(os.path.join(folder, "truncated.json"), "w") as f:
        f.write('{"type": "FeatureCollection", "features": [\n  {"type": "Feature",')
    with open(os.path.join(folder, "notes.md"), "w") as f:
        f.write("not a shape file\n")
    return expected


def stored_count(port):
    return call(port, "GET", "/v1/collections/parts")[1]["stats"]["shapes"]


def same_coordinates(a, b):
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(same_coordinates(x, y) for x, y in zip(a, b))
    return float(a) == float(b)


def main():
    work = tempfile.mkdtemp(prefix="waymark-cli-")
    server, port = start_server(os.path.join(work, "data"))
    try:
        status, _ = call(port, "PUT", "/v1/collections/parts",
                         {"frame": "centered", "landmarks": {"layout": "grid", "count": 32, "domain": [-80, -80, 80, 80]}})
        check(status == 201, "collection created")

        # --- ingest a folder with some bad files -------------------------------------------------
        folder = os.path.join(work, "export")
        os.makedirs(folder)
        expected = write_inputs(folder)
        code, out, err = cli(port, "ingest", "parts", folder, "--id-property", "sku", "--batch", "64")
        check(code == 1, "some inputs rejected: exit 1 (got %d; %s)" % (code, err))
        check("stored %d shapes from 6 files" % len(expected) in out, "summary counts the stored shapes: " + out[:300])
        check("ignored 1 file of another type" in out, "the .md file is ignored and said so: " + out[:300])
        check(stored_count(port) == len(expected), "the server holds every good shape")
        for where, reason in [("catalogue.geojson: feature 201", "has no geometry"),
                              ("more.ndjson: line 4", "not valid JSON"),
                              ("more.ndjson: line 7", "geometry"),
                              ("more.ndjson: line 11", "not valid JSON"),
                              ("brackets.geojson: feature 3 (id BR-02)", "geometry"),
                              ("sketches.wkt: line 5", "geometry"),
                              ("panel.svg: line 5, <polygon> 3", "transform"),
                              ("panel.svg: line 6, <polygon> 4", "points attribute"),
                              ("truncated.json: line 2, byte offset", "not valid JSON")]:
            listed = [line for line in out.splitlines() if where in line]
            check(len(listed) == 1 and reason in listed[0], "rejection listed with its place: %s / %s" % (where, reason))
        check("rejected 9 inputs" in out, "nine rejections counted")
        check("progress:" in err, "plain progress lines when not on a terminal")

        status, slot = call(port, "GET", "/v1/collections/parts/shapes/slot")
        check(status == 200 and slot["geometry"]["type"] in ("Polygon", "LineString"), "the SVG path is stored")

        # --- query ------------------------------------------------------------------------------
        some_id = sorted(i for i in expected if i.startswith(("BRK", "GSK", "CLP", "FLG")))[0]
        code, out, err = cli(port, "nearest", "parts", "--id", some_id, "--k", "3", "--exact", "--json")
        answer = json.loads(out) if code == 0 else {}
        _, direct = call(port, "POST", "/v1/collections/parts/nearest", {"id": some_id, "k": 3, "mode": "exact"})
        check(code == 0 and [h["id"] for h in answer["results"]] == [h["id"] for h in direct["results"]],
              "nearest --json gives the API's answer")
        check(answer.get("certified") is True, "exact mode answer certified")
        code, out, err = cli(port, "nearest", "parts", "LINESTRING (0 0, 10 0, 10 5)", "--k", "2")
        rows = [line.split() for line in out.splitlines()[1:3]]
        check(code == 0 and rows[0][1] == "hook-1" and float(rows[0][2]) == 0.0, "nearest by inline WKT finds the same hook first")
        one_path = os.path.join(work, "one.svg")
        with open(one_path, "w") as f:
            f.write('<svg xmlns="http://www.w3.org/2000/svg"><path d="M 10 10 L 40 10 L 40 20 L 10 20 Z"/></svg>')
        code, out, err = cli(port, "nearest", "parts", one_path, "--k", "1", "--exact")
        check(code == 0 and out.splitlines()[1].split()[1:3] == ["slot", "0"], "nearest to an SVG file: " + out + err)
        code, out, err = cli(port, "nearest", "parts", os.path.join(folder, "sketches.wkt"))
        check(code == 2 and "holds 4 shapes" in err, "a file of several shapes is refused for a query: " + err)
        code, out, err = cli(port, "nearest", "parts", "--id", "no-such-id")
        check(code == 3 and "404" in err, "a missing id is reported with the server's 404: " + err)

        # --- an id repeated in batches in flight at once keeps its later record ------------------
        status, _ = call(port, "PUT", "/v1/collections/pairs", {"landmarks": {"count": 16}})
        pairs_path = os.path.join(work, "pairs.ndjson")
        with open(pairs_path, "w") as f:
            for i in range(40):
                for version in (1, 2):
                    f.write(json.dumps({"id": "pair-%d" % i, "metadata": {"version": version},
                                        "geometry": {"type": "LineString", "coordinates": [[0, 0], [i + 1, version]]}}) + "\n")
        code, out, err = cli(port, "ingest", "pairs", pairs_path, "--batch", "1", "--connections", "4", "--progress", "none")
        check(status == 201 and code == 0 and "stored 80 shapes" in out, "pairs ingested on 4 connections: " + out + err)
        stale = [i for i in range(40)
                 if call(port, "GET", "/v1/collections/pairs/shapes/pair-%d" % i)[1].get("metadata") != {"version": 2}]
        check(not stale, "each id keeps its later record though batches were in flight at once; stale: %s" % stale)
        code, out, err = cli(port, "ingest", "pairs", pairs_path, "--connections", "0")
        check(code == 2 and "--connections 1 to 16" in err, "--connections 0 is a usage error: " + err)

        # --- stats --------------------------------------------------------------------------------
        code, out, err = cli(port, "stats")
        check(code == 0 and any(line.split()[:2] == ["parts", str(len(expected))] for line in out.splitlines()),
              "stats lists the collection with its count")
        code, out, err = cli(port, "stats", "parts")
        check(code == 0 and "frame            centered" in out and "32, grid" in out, "stats of one collection")

        # --- export, compared with the input ------------------------------------------------------
        export_path = os.path.join(work, "parts.geojson")
        code, out, err = cli(port, "export", "parts", "--output", export_path)
        check(code == 0 and "%d shapes" % len(expected) in err, "export reports its count")
        with open(export_path) as f:
            exported = json.load(f)
        by_id = {feature["id"]: feature for feature in exported["features"]}
        check(set(by_id) == set(expected), "export holds exactly the stored ids")
        mismatched = [i for i, (geometry, metadata) in expected.items()
                      if i in by_id and (by_id[i]["properties"] != metadata or
                                         (geometry is not None and (by_id[i]["geometry"]["type"] != geometry["type"] or
                                                                    not same_coordinates(by_id[i]["geometry"]["coordinates"],
                                                                                         geometry["coordinates"]))))]
        check(not mismatched, "exported geometry and metadata equal the input: %s" % mismatched[:5])
        check(not os.path.exists(export_path + ".partial"), "no partial file left behind")
        # A page the CLI cannot copy as text (an id outside printable ASCII) is read as a JSON
        # document; its export is the same as for any other page.
        call(port, "PUT", "/v1/collections/accents", {"landmarks": {"count": 16}})
        accents = {"rondelle-\u00e9": ({"type": "LineString", "coordinates": [[0, 0], [2, 1]]}, {"finish": "zinc \"A\""}),
                   "washer-2": ({"type": "LineString", "coordinates": [[1, 1], [3, 0.5]]}, {})}
        call(port, "POST", "/v1/collections/accents/shapes",
             "".join(json.dumps({"id": i, "geometry": g, "metadata": m}) + "\n" for i, (g, m) in accents.items()))
        accents_path = os.path.join(work, "accents.geojson")
        code, out, err = cli(port, "export", "accents", "--output", accents_path)
        with open(accents_path, encoding="utf-8") as f:
            exported = {feature["id"]: (feature["geometry"], feature["properties"]) for feature in json.load(f)["features"]}
        check(code == 0 and exported == accents, "export of a page read as a document: %s" % exported)

        # --- resume after the loader is killed ----------------------------------------------------
        call(port, "PUT", "/v1/collections/big", {"frame": "centered", "landmarks": {"count": 16, "domain": [-80, -80, 80, 80]}})
        big_folder = os.path.join(work, "big")
        os.makedirs(big_folder)
        total = 12000
        with open(os.path.join(big_folder, "all.ndjson"), "w") as f:
            f.write("".join(json.dumps(p) + "\n" for p in catalogue(total, 5)))
        environment = dict(os.environ, WAYMARK_SERVER="http://127.0.0.1:%d" % port, WAYMARK_TOKEN=TOKEN)
        loader = subprocess.Popen([WAYMARK, "ingest", "big", big_folder, "--batch", "50", "--progress", "none"],
                                  stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=environment)
        count_at_kill = 0
        deadline = time.time() + 60
        while time.time() < deadline:
            count_at_kill = call(port, "GET", "/v1/collections/big")[1]["stats"]["shapes"]
            if count_at_kill >= 500:
                break
            time.sleep(0.01)
        loader.send_signal(signal.SIGKILL)
        loader.wait()
        # A batch the loader sent just before it died may still be applied: wait until the count
        # settles, then that is what the resumed load must skip.
        after_kill = -1
        while True:
            count = call(port, "GET", "/v1/collections/big")[1]["stats"]["shapes"]
            if count == after_kill:
                break
            after_kill = count
            time.sleep(0.3)
        check(0 < after_kill < total, "the loader was killed part-way (%d of %d stored)" % (after_kill, total))
        code, out, err = cli(port, "ingest", "big", big_folder, "--resume", "--progress", "none")
        check(code == 0, "resumed load succeeds: " + err)
        check("skipped %d already stored" % after_kill in out, "resume skips exactly what was stored: " + out)
        check("stored %d shapes" % (total - after_kill) in out, "resume sends only the rest: " + out)
        check(call(port, "GET", "/v1/collections/big")[1]["stats"]["shapes"] == total, "every shape stored after resume")

        # --- failures: wrong token, unreachable server, missing collection ------------------------
        code, out, err = cli(port, "ingest", "parts", folder, token="not-the-token-0123456789")
        check(code == 3 and "401" in err and "token" in err, "a refused token stops the load with a clear message: " + err)
        code, out, err = cli(port, "stats", server="http://127.0.0.1:1")
        check(code == 3 and "cannot reach the server at http://127.0.0.1:1" in err, "an unreachable server is named: " + err)
        code, out, err = cli(port, "ingest", "nothing-here", folder)
        check(code == 3 and "404" in err, "a missing collection is reported: " + err)
        code, out, err = cli(port, "stats", server="https://example.invalid")
        check(code == 3 and "plain HTTP" in err, "https addresses are refused with the reason: " + err)
        code, out, err = cli(port, "ingest", "parts")
        check(code == 2 and "usage" in err, "missing operands: usage, exit 2")
    finally:
        server.stop()
        shutil.rmtree(work, ignore_errors=True)
    retry_test()


class FlakyServer(http.server.BaseHTTPRequestHandler):
    """Answers the first two bulk posts with 503 (Retry-After: 0), then accepts; counts posts."""
    posts = []

    def log_message(self, *ignored):
        pass

    def reply(self, status, body, headers=()):
        data = json.dumps(body).encode()
        self.send_response(status)
        for name, value in headers:
            self.send_header(name, value)
        self.send_header("Content-Type", "application/json")
        self.send_header("Content-Length", str(len(data)))
        self.end_headers()
        self.wfile.write(data)

    def do_GET(self):
        self.reply(200, {"name": "flaky"})

    def do_POST(self):
        body = self.rfile.read(int(self.headers["Content-Length"])).decode()
        FlakyServer.posts.append(body)
        if len(FlakyServer.posts) <= 2:
            self.reply(503, {"error": {"code": "not_ready", "message": "warming up", "where": ""}}, [("Retry-After", "0")])
        else:
            lines = [line for line in body.splitlines() if line]
            self.reply(200, {"accepted": len(lines), "rejected": 0, "rejections": [], "lines": len(lines)})


def retry_test():
    stand_in = http.server.HTTPServer(("127.0.0.1", 0), FlakyServer)
    threading.Thread(target=stand_in.serve_forever, daemon=True).start()
    work = tempfile.mkdtemp(prefix="waymark-cli-retry-")
    try:
        with open(os.path.join(work, "few.wkt"), "w") as f:
            f.write("a\tLINESTRING (0 0, 1 1)\nb\tLINESTRING (0 0, 2 2)\n")
        code, out, err = cli(0, "ingest", "flaky", work, server="http://127.0.0.1:%d" % stand_in.server_port)
        check(code == 0 and "stored 2 shapes" in out, "the load goes through after two 503s: " + out + err)
        check(len(FlakyServer.posts) == 3 and FlakyServer.posts[0] == FlakyServer.posts[2], "the same batch was resent twice")
        check("2 retries" in out, "the summary counts the retries: " + out)
        FlakyServer.posts = []
        code, out, err = cli(0, "ingest", "flaky", work, "--retries", "1", server="http://127.0.0.1:%d" % stand_in.server_port)
        check(code == 3 and "503" in err and "--resume" in err, "giving up names the status and how to continue: " + err)
    finally:
        stand_in.shutdown()
        shutil.rmtree(work, ignore_errors=True)


main()
check.finish()

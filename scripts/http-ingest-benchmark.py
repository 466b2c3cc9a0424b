#!/usr/bin/env python3
"""Ingest over HTTP: bulk NDJSON requests of LINES GeoJSON LineStrings each (64 vertices,
invented random walks, seeded) to a fresh waymarkd, sent on CONNECTIONS connections at once,
each waiting for its reply before sending the next (as `waymark ingest` does, with 1,000
lines). The server commits them in batches of 1,000 however many a request holds. Prints
shapes/s from the first request to the last reply; asserts nothing. Request bodies are made
before the clock starts. Builds nothing: run after a Release build (build/server/waymarkd), or
name another binary in WAYMARKD.

With --cli ndjson or --cli geojson the same shapes are written to one file of that format
(a FeatureCollection for geojson) and loaded with `waymark ingest --connections CONNECTIONS
--batch LINES` (build/clients/cli/waymark, or WAYMARK_CLI): the clock covers the whole command,
reading and converting the file included.

Usage: scripts/http-ingest-benchmark.py [SHAPES (30000)] [CONNECTIONS (1)] [LINES (1000)] [--cli ndjson|geojson]
"""
import http.client
import json
import os
import random
import re
import subprocess
import sys
import tempfile
import threading
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
TOKEN = "ingest-benchmark-" + os.urandom(8).hex()


def main():
    arguments = sys.argv[1:]
    cli_format = None
    if "--cli" in arguments:
        at = arguments.index("--cli")
        cli_format = arguments[at + 1] if at + 1 < len(arguments) else None
        if cli_format not in ("ndjson", "geojson"):
            sys.exit("--cli takes ndjson or geojson")
        del arguments[at:at + 2]
    shapes = int(arguments[0]) if len(arguments) > 0 else 30000
    connections = int(arguments[1]) if len(arguments) > 1 else 1
    per_request = int(arguments[2]) if len(arguments) > 2 else 1000
    random.seed(1)
    templates = []
    for _ in range(200):
        x = y = 0.0
        walk = []
        for _ in range(64):
            x += random.uniform(-1, 1)
            y += random.uniform(-1, 1)
            walk.append((x, y))
        templates.append(walk)
    bodies = []
    for start in range(0, shapes, per_request):
        lines = []
        for n in range(start, min(shapes, start + per_request)):
            walk = random.choice(templates)
            coordinates = [[px + random.uniform(-0.3, 0.3), py + random.uniform(-0.3, 0.3)] for px, py in walk]
            lines.append(json.dumps({"id": f"walk-{n}", "geometry": {"type": "LineString", "coordinates": coordinates}}))
        bodies.append("\n".join(lines) + "\n")

    work = tempfile.mkdtemp(prefix="waymark-http-ingest-")
    log = open(os.path.join(work, "log"), "w+")
    binary = os.environ.get("WAYMARKD", os.path.join(ROOT, "build/server/waymarkd"))
    server = subprocess.Popen([binary, "--data-directory", os.path.join(work, "data"),
                               "--port", "0", "--log-level", "warn"],
                              env=dict(os.environ, WAYMARK_WRITE_TOKENS=TOKEN), stdout=log, stderr=log)
    try:
        address = None
        while address is None:
            time.sleep(0.1)
            log.seek(0)
            found = re.search(r"http://127\.0\.0\.1:(\d+)", log.read())
            address = int(found.group(1)) if found else None
        headers = {"Authorization": "Bearer " + TOKEN}

        def request(connection, method, path, body, content_type):
            connection.request(method, path, body=body, headers=dict(headers, **{"Content-Type": content_type}))
            reply = connection.getresponse()
            data = reply.read()
            if reply.status not in (200, 201):
                raise RuntimeError(f"{method} {path}: HTTP {reply.status} {data[:300]!r}")

        request(http.client.HTTPConnection("127.0.0.1", address, timeout=600), "PUT", "/v1/collections/walks",
                json.dumps({"landmarks": {"count": 64}, "frame": "unit"}), "application/json")
        if cli_format:
            return load_with_cli(work, address, bodies, cli_format, shapes, connections, per_request)
        next_body = iter(range(len(bodies)))
        lock = threading.Lock()
        errors = []

        def send_bodies():
            connection = http.client.HTTPConnection("127.0.0.1", address, timeout=600)
            try:
                while True:
                    with lock:
                        b = next(next_body, None)
                    if b is None or errors:
                        return
                    request(connection, "POST", "/v1/collections/walks/shapes", bodies[b], "application/x-ndjson")
            except Exception as error:  # reported below
                errors.append(error)

        started = time.monotonic()
        senders = [threading.Thread(target=send_bodies) for _ in range(connections)]
        for sender in senders:
            sender.start()
        for sender in senders:
            sender.join()
        seconds = time.monotonic() - started
        if errors:
            raise errors[0]
        print(f"http ingest: {shapes} shapes of 64 vertices, {per_request} per request, on {connections} connection(s): "
              f"{seconds:.2f} s = {shapes / seconds:,.0f} shapes/s")
    finally:
        server.terminate()
        server.wait()
        subprocess.run(["rm", "-rf", work])


def load_with_cli(work, address, bodies, cli_format, shapes, connections, per_request):
    folder = os.path.join(work, "input")
    os.makedirs(folder)
    lines = [line for body in bodies for line in body.splitlines()]
    if cli_format == "ndjson":
        with open(os.path.join(folder, "walks.ndjson"), "w") as f:
            f.write("\n".join(lines) + "\n")
    else:
        features = []
        for line in lines:
            shape = json.loads(line)
            features.append({"type": "Feature", "id": shape["id"], "geometry": shape["geometry"], "properties": {}})
        with open(os.path.join(folder, "walks.geojson"), "w") as f:
            json.dump({"type": "FeatureCollection", "features": features}, f)
    cli = os.environ.get("WAYMARK_CLI", os.path.join(ROOT, "build/clients/cli/waymark"))
    started = time.monotonic()
    subprocess.run([cli, "ingest", "walks", folder, "--server", f"http://127.0.0.1:{address}", "--token", TOKEN,
                    "--connections", str(connections), "--batch", str(per_request), "--progress", "none"],
                   check=True, stdout=subprocess.DEVNULL)
    seconds = time.monotonic() - started
    print(f"waymark ingest of one {cli_format} file: {shapes} shapes of 64 vertices, batches of {per_request}, "
          f"{connections} connection(s): {seconds:.2f} s = {shapes / seconds:,.0f} shapes/s")


main()

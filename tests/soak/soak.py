"""A bounded soak over loopback: bulk upserts, deletes and queries at once against one waymarkd for
several minutes. Reports p50/p99 per operation, status counts and the server's resident memory
over time, and fails on any reply other than 2xx, a deliberate 429 (max_concurrent_queries is
set low on purpose) or a 404 for deleting an id that is already gone, or when memory keeps
growing after the warm-up (the id space is bounded, so the stored set reaches a steady size).

It also fails when waymarkd does not exit cleanly (status 0) after SIGTERM, which is how a
sanitizer's report shows: the ThreadSanitizer build runs this soak for a minute in CI with
--no-memory-check (the sanitizer's shadow memory makes resident size meaningless there).

Usage: soak.py WAYMARKD [MINUTES=5] [--no-memory-check]     (scripts/soak.sh builds and runs it)
"""
import json
import os
import random
import sys
import tempfile
import threading
import time

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from waymarkd_harness import Waymarkd, call  # noqa: E402

ARGUMENTS = [a for a in sys.argv[1:] if not a.startswith("--")]
WAYMARKD = ARGUMENTS[0]
MINUTES = float(ARGUMENTS[1]) if len(ARGUMENTS) > 1 else 5.0
CHECK_MEMORY = "--no-memory-check" not in sys.argv
TOKEN = "soak-write-token-0123456789"
ID_SPACE = 40000  # upserts cycle over these ids, so the collection stops growing
stop = threading.Event()
lock = threading.Lock()
latencies = {}   # operation -> [ms]
statuses = {}    # (operation, status) -> count
unexpected = []  # (operation, status, body)


def walk(rng, vertices=32):
    x = y = 0.0
    points = []
    for _ in range(vertices):
        x += rng.uniform(-1, 1)
        y += rng.uniform(-1, 1)
        points.append("%.4f %.4f" % (x, y))
    return "LINESTRING (" + ", ".join(points) + ")"


def record(operation, status, milliseconds, body, allowed=()):
    with lock:
        if 200 <= status < 300:  # latency of answered requests; refusals are counted below
            latencies.setdefault(operation, []).append(milliseconds)
        statuses[(operation, status)] = statuses.get((operation, status), 0) + 1
        if not (200 <= status < 300 or status in allowed):
            unexpected.append((operation, status, body[:300]))


def timed(port, operation, method, path, body=None, allowed=()):
    start = time.perf_counter()
    status, data = call(port, method, path, body, TOKEN)
    record(operation, status, (time.perf_counter() - start) * 1000, data.decode(errors="replace"), allowed)
    return status, data


def ingester(port, seed):
    rng = random.Random(seed)
    while not stop.is_set():
        lines = "".join(json.dumps({"id": "s%05d" % rng.randrange(ID_SPACE), "geometry": walk(rng),
                                    "metadata": {"batch": rng.randrange(100)}}) + "\n" for _ in range(500))
        timed(port, "bulk upsert (500 shapes)", "POST", "/v1/collections/soak/shapes", lines)


def deleter(port, seed):
    rng = random.Random(seed)
    while not stop.is_set():
        timed(port, "delete one", "DELETE", "/v1/collections/soak/shapes/s%05d" % rng.randrange(ID_SPACE), allowed=(404,))
        time.sleep(0.02)


def querier(port, seed):
    rng = random.Random(seed)
    while not stop.is_set():
        shape = walk(rng)
        kind = rng.random()
        if kind < 0.6:
            timed(port, "nearest fast", "POST", "/v1/collections/soak/nearest", json.dumps({"shape": shape, "k": 10}),
                  allowed=(429,))
        elif kind < 0.9:
            timed(port, "nearest exact", "POST", "/v1/collections/soak/nearest",
                  json.dumps({"shape": shape, "k": 10, "mode": "exact"}), allowed=(429,))
        else:
            timed(port, "within", "POST", "/v1/collections/soak/within",
                  json.dumps({"shape": shape, "radius": 0.5, "max_results": 100}), allowed=(429,))


def resident_mb(pid):
    with open("/proc/%d/status" % pid) as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024.0
    return 0.0


def memory_gauges(port):
    """The server's own memory figures from /metrics, in MB: what RSS growth can be traced to."""
    status, text = call(port, "GET", "/metrics", None, TOKEN)
    if status != 200:
        return {}
    wanted = {"waymark_block_cache_bytes": "block cache", "waymark_collection_memtable_bytes": "memtables",
              "waymark_collection_index_bytes": "indexes", "waymark_collection_table_reader_bytes": "table readers"}
    totals = {}
    for line in text.decode().splitlines():
        if line.startswith("#") or not line:
            continue
        name = line.split("{")[0].split()[0]
        if name in wanted:
            totals[wanted[name]] = totals.get(wanted[name], 0.0) + float(line.rsplit(" ", 1)[1]) / 2**20
    return totals


def percentile(values, p):
    values = sorted(values)
    return values[min(len(values) - 1, int(p * len(values)))] if values else 0.0


def main():
    work = tempfile.mkdtemp(prefix="waymark-soak-")
    server = Waymarkd(WAYMARKD, os.path.join(work, "data"),
                      {"WAYMARK_WRITE_TOKENS": TOKEN, "WAYMARK_MAX_CONCURRENT_QUERIES": "3",
                       "WAYMARK_LOG_LEVEL": "warn", "WAYMARK_WORKER_THREADS": "2",
                       # five batches per 500-shape bulk request: a batch commits while the
                       # handler reads the next one's lines
                       "WAYMARK_BULK_BATCH_SIZE": "100",
                       # a small cache, so that it is full before the warm-up ends and RSS can be
                       # expected flat after it (it fills to capacity: blocks of rewritten files linger)
                       "WAYMARK_BLOCK_CACHE_BYTES": str(64 << 20)})
    try:
        status, body = call(server.port, "PUT", "/v1/collections/soak",
                            json.dumps({"frame": "unit", "index": "graph", "landmarks": {"count": 32}}), TOKEN)
        assert status == 201, body
        threads = [threading.Thread(target=ingester, args=(server.port, 1)),
                   threading.Thread(target=deleter, args=(server.port, 2))]
        threads += [threading.Thread(target=querier, args=(server.port, 10 + i)) for i in range(4)]
        for thread in threads:
            thread.start()
        samples, breakdowns = [], []
        started = time.time()
        while time.time() - started < MINUTES * 60:
            time.sleep(5)
            samples.append((time.time() - started, resident_mb(server.process.pid)))
            gauges = memory_gauges(server.port)
            breakdowns.append(gauges)
            print("soak: %4.0f s  RSS %.0f MB (%s)  unexpected replies %d"
                  % (samples[-1][0], samples[-1][1], ", ".join("%s %.0f" % item for item in sorted(gauges.items())),
                     len(unexpected)), flush=True)
        stop.set()
        for thread in threads:
            thread.join()
        _, collection = call(server.port, "GET", "/v1/collections/soak", None, TOKEN)
        shapes = json.loads(collection)["stats"]["shapes"]
    finally:
        server.stop()
    exit_status = server.process.returncode
    print("\n| operation (answered) | count | p50 ms | p99 ms |\n|---|---|---|---|")
    for operation, values in sorted(latencies.items()):
        print("| %s | %d | %.2f | %.2f |" % (operation, len(values), percentile(values, 0.5), percentile(values, 0.99)))
    print("\nstatus counts: " + ", ".join("%s %d: %d" % (o, s, c) for (o, s), c in sorted(statuses.items())))
    third = samples[len(samples) // 3][1] if samples else 0
    peak_after_warm_up = max((mb for _, mb in samples[len(samples) // 3:]), default=0)
    print("stored shapes at the end: %d; RSS at one third: %.0f MB, highest after: %.0f MB, at the end: %.0f MB"
          % (shapes, third, peak_after_warm_up, samples[-1][1] if samples else 0))
    if breakdowns:
        describe = lambda gauges: ", ".join("%s %.0f MB" % item for item in sorted(gauges.items()))
        print("server's own figures at one third: %s; at the end: %s"
              % (describe(breakdowns[len(breakdowns) // 3]), describe(breakdowns[-1])))
    failed = False
    if unexpected:
        print("FAIL: %d unexpected replies, first: %s" % (len(unexpected), unexpected[:3]))
        failed = True
    if exit_status != 0:
        reports = [line for line in server.log if "Sanitizer" in line or "SUMMARY" in line]
        print("FAIL: waymarkd exited with status %s after SIGTERM; %s" % (exit_status, "".join(reports[:10])))
        failed = True
    # Steady state: the id space is bounded; allow 25 % (index rebuilds, allocator slack).
    if CHECK_MEMORY and samples and peak_after_warm_up > third * 1.25 + 32:
        print("FAIL: memory kept growing after the warm-up")
        failed = True
    sys.exit(1 if failed else 0)


main()

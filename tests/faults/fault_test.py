"""Disk faults under a real waymarkd: a failing fsync, and a filling disk, injected by
libwaymark_fault_injection.so (LD_PRELOAD, tests/faults/fault_injection.cc) for the data
directory only. For each fault: bulk batches are sent until writes fail; the failing request
gets a clear error (500 io_error for the failed fsync; 507 storage_full once free space drops
below min_free_disk_bytes, before the disk is actually full) and the log says what failed;
later writes are refused while reads still answer; after a restart without the fault, every
acknowledged shape is stored, the failed batch is stored whole or not at all, and writes work
again. Then one body of many batches meets a failing fsync part way: what the reply reports
and what the restarted store holds end exactly at the failed batch.

Usage: fault_test.py WAYMARKD FAULT_LIBRARY
"""
import json
import os
import shutil
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "support"))
from waymarkd_harness import Checks, Waymarkd, call as raw_call  # noqa: E402

WAYMARKD, LIBRARY = sys.argv[1], os.path.abspath(sys.argv[2])
TOKEN = "fault-test-token-0123456789"
check = Checks("fault test")


class Server(Waymarkd):
    def __init__(self, data, fault=None, settings=None):
        env = dict(WAYMARK_WRITE_TOKENS=TOKEN, WAYMARK_MIN_FREE_DISK_BYTES="1000000", **(settings or {}))
        if fault:
            env.update(LD_PRELOAD=LIBRARY, WAYMARK_FAULT=fault, WAYMARK_FAULT_DIRECTORY=os.path.realpath(data))
        super().__init__(WAYMARKD, data, env)

    def call(self, method, path, body=None):
        status, data = raw_call(self.port, method, path, body, TOKEN)
        try:
            return status, json.loads(data)
        except ValueError:
            return status, data


def batch(number, size=100):
    lines = []
    for i in range(size):
        x = number * size + i
        lines.append(json.dumps({"id": "b%04d-%03d" % (number, i),
                                 "geometry": "LINESTRING (0 0, %d 1, %d 3, 5 %d)" % (x % 97 + 1, x % 13, x % 29),
                                 "metadata": {"batch": number}}))
    return "\n".join(lines) + "\n"


def stored_ids(server):
    ids, after = set(), ""
    while True:
        status, page = server.call("GET", "/v1/collections/c/shapes?ids_only=true&limit=10000" + ("&after=" + after if after else ""))
        assert status == 200, page
        ids.update(shape["id"] for shape in page["shapes"])
        if page["next_after"] is None:
            return ids
        after = page["next_after"]


def run(fault, label, expected_status, expected_code, log_words):
    work = tempfile.mkdtemp(prefix="waymark-fault-")
    data = os.path.join(work, "data")
    try:
        server = Server(data)  # the collection is made on a healthy disk
        server.call("PUT", "/v1/collections/c", json.dumps({"landmarks": {"count": 16}}))
        server.stop()

        server = Server(data, fault)
        acknowledged, failed_batch, failure = set(), None, None
        for number in range(400):
            status, reply = server.call("POST", "/v1/collections/c/shapes", batch(number))
            if status == 200 and reply.get("accepted") == 100:
                acknowledged.update("b%04d-%03d" % (number, i) for i in range(100))
                continue
            failed_batch, failure = number, (status, reply)
            break
        check(failure is not None, label + ": the injected fault surfaced as a failed write")
        check(len(acknowledged) > 0, label + ": writes succeeded before the fault (%d shapes)" % len(acknowledged))
        if failure:
            status, reply = failure
            error = reply.get("error", {}) if isinstance(reply, dict) else {}
            check(status == expected_status and error.get("code") == expected_code and
                  "stopped at the batch" in error.get("message", ""),
                  label + ": the failing request says what failed: %d %s" % (status, reply))
            status, reply = server.call("PUT", "/v1/collections/c/shapes/after-fault",
                                        json.dumps({"geometry": "LINESTRING (0 0, 1 1)"}))
            check(status >= 500, label + ": a write after the fault is refused (%d %s)" % (status, reply))
            status, reply = server.call("POST", "/v1/collections/c/nearest", json.dumps({"shape": "LINESTRING (0 0, 2 1)", "k": 3}))
            check(status == 200 and len(reply["results"]) == 3, label + ": reads still answer after the fault")
        server.stop()
        check(any(all(word in line for word in log_words) for line in server.log),
              label + ": the log names the failure (%s)" % " ".join(log_words))

        server = Server(data)  # restart on a healthy disk
        ids = stored_ids(server)
        check(acknowledged <= ids, label + ": every acknowledged shape survived (%d missing)" % len(acknowledged - ids))
        if failed_batch is not None:
            in_failed = {i for i in ids if i.startswith("b%04d-" % failed_batch)}
            check(len(in_failed) in (0, 100), label + ": the failed batch is whole or absent (%d of 100)" % len(in_failed))
        check(ids <= acknowledged | {"b%04d-%03d" % (failed_batch, i) for i in range(100)},
              label + ": nothing else appeared")
        status, reply = server.call("POST", "/v1/collections/c/shapes", batch(999))
        check(status == 200 and reply["accepted"] == 100, label + ": writes work again after the restart")
        server.stop()
    finally:
        shutil.rmtree(work, ignore_errors=True)


def run_one_body(fault, label):
    """One bulk body of many batches (100 lines each) with a few bad lines among them, on a
    disk whose fsync starts failing part way: the batches before the failed one are stored, the
    failed one whole or not at all, nothing after it, and the reply counts and lists exactly the
    stored lines and the bad lines up to the failed batch's last line."""
    work = tempfile.mkdtemp(prefix="waymark-fault-")
    data = os.path.join(work, "data")
    try:
        server = Server(data)
        server.call("PUT", "/v1/collections/c", json.dumps({"landmarks": {"count": 16}}))
        server.stop()
        good = [line for number in range(60) for line in batch(number).splitlines()]
        lines, good_at, bad_at = [], [], []
        for i, line in enumerate(good):
            if i % 170 == 85:
                lines.append('{"id": "bad-%d", "geometry": "LINESTRING (0 0)"}' % i)
                bad_at.append(len(lines))
            lines.append(line)
            good_at.append(len(lines))
        server = Server(data, fault, {"WAYMARK_BULK_BATCH_SIZE": "100"})
        status, reply = server.call("POST", "/v1/collections/c/shapes", "\n".join(lines) + "\n")
        server.stop()
        error = reply.get("error", {}) if isinstance(reply, dict) else {}
        where = error.get("where", "")
        check(status == 500 and error.get("code") == "io_error" and where.startswith("line "),
              label + ": the body failed part way with the line it stopped at: %d %s" % (status, str(reply)[:300]))
        if not where.startswith("line "):
            return
        first_failed = int(where[len("line "):])
        failed = good_at.index(first_failed) if first_failed in good_at else -1
        check(failed > 0 and failed % 100 == 0, label + ": the failed batch starts at a batch boundary (line %d)" % first_failed)
        last_read = good_at[min(failed + 99, len(good_at) - 1)]
        check(reply.get("accepted") == failed, label + ": accepted counts the batches before it (%s of %d)" %
              (reply.get("accepted"), failed))
        listed = sorted(r["line"] for r in reply.get("rejections", []))
        expected = [line for line in bad_at if line <= last_read]
        check(listed == expected and reply.get("rejected") == len(expected),
              label + ": the bad lines up to the failed batch's end are reported, none after (%s, expected %s)" %
              (listed, expected))

        server = Server(data)
        ids = stored_ids(server)
        server.stop()
        before = {json.loads(lines[at - 1])["id"] for at in good_at[:failed]}
        in_failed = {json.loads(lines[at - 1])["id"] for at in good_at[failed:failed + 100]}
        check(before <= ids and (ids - before == set() or ids - before == in_failed),
              label + ": every batch before the failed one is stored, the failed one whole or not at all, nothing "
              "after (%d stored, %d before the failure)" % (len(ids), len(before)))
    finally:
        shutil.rmtree(work, ignore_errors=True)


run("fsync:30", "failing fsync", 500, "io_error", ["error", "bulk ingest failed"])
run("full:3000000", "filling disk", 507, "storage_full", ["write refused", "bytes free"])
run_one_body("fsync:30", "one body, failing fsync")
check.finish()

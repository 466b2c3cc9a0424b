"""Shared by the black-box Python tests that start a real waymarkd (standard library only):
a check counter, a server process on 127.0.0.1 with an ephemeral port, and one HTTP call."""
import http.client
import os
import subprocess
import sys
import threading
import time


class Checks:
    """check(condition, message) counts and reports; finish() prints a summary and exits."""

    def __init__(self, name):
        self.name, self.run, self.failures = name, 0, []

    def __call__(self, condition, message):
        self.run += 1
        if not condition:
            self.failures.append(message)
            print("FAIL:", message, flush=True)

    def finish(self):
        print("%s: %d checks, %d failed" % (self.name, self.run, len(self.failures)))
        sys.exit(1 if self.failures else 0)


def call(port, method, path, body=None, token=None, content_type="application/json"):
    """One request on a fresh connection; returns (status, body bytes)."""
    connection = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
    headers = {"Content-Type": content_type}
    if token:
        headers["Authorization"] = "Bearer " + token
    connection.request(method, path, body=None if body is None else (body.encode() if isinstance(body, str) else body),
                       headers=headers)
    response = connection.getresponse()
    return response.status, response.read()


class Waymarkd:
    """waymarkd on a data directory, ready when constructed; `log` collects its output lines."""

    def __init__(self, binary, data_directory, environment=None):
        env = dict(os.environ, **(environment or {}))
        self.process = subprocess.Popen([binary, "--data-directory", data_directory, "--port", "0"],
                                        stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, env=env)
        self.log, self.port = [], None
        while self.port is None:
            line = self.process.stdout.readline()
            assert line, "waymarkd did not start:\n" + "".join(self.log)
            self.log.append(line)
            if "listening on" in line:
                self.port = int(line.rsplit(":", 1)[1])
        threading.Thread(target=lambda: [self.log.append(l) for l in self.process.stdout], daemon=True).start()
        deadline = time.time() + 60
        while True:
            try:
                if call(self.port, "GET", "/readyz")[0] == 200:
                    break
            except OSError:
                pass
            assert time.time() < deadline, "waymarkd did not become ready"
            time.sleep(0.05)

    def stop(self):
        self.process.terminate()
        try:
            self.process.wait(timeout=60)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()

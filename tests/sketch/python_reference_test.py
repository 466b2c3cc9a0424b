"""Checks `waymark distance` against Python's reference libraries (Debian's python3-scipy and
python3-shapely, run with /usr/bin/python3).

- SciPy 1.10 scipy.spatial.distance.directed_hausdorff on point sets: an implementation
  independent of GEOS (the early-break algorithm of Taha & Hanbury 2015).
- Shapely 1.8 point-to-line distances from points sampled every 1/128 of each segment: the
  sampled maximum approaches the continuous value from below, within half the spacing.
Usage: python_reference_test.py PATH_TO_WAYMARK
"""
import random
import subprocess
import sys

import numpy
from scipy.spatial.distance import directed_hausdorff
from shapely import wkt as shapely_wkt
from shapely.geometry import Point

waymark = sys.argv[1]
rng = random.Random(41)
passed = failed = 0


def ours(a, b, *flags):
    out = subprocess.run([waymark, "distance", *flags, a, b], capture_output=True, text=True, check=True)
    return float(out.stdout.splitlines()[0])


def multipoint(points):
    return "MULTIPOINT (" + ", ".join(f"({x!r} {y!r})" for x, y in points) + ")"


def check(condition, message):
    global passed, failed
    if condition:
        passed += 1
    else:
        failed += 1
        print("FAILED:", message)


for trial in range(40):
    a = [(rng.uniform(0, 10), rng.uniform(0, 10)) for _ in range(rng.randint(1, 25))]
    b = [(rng.uniform(0, 10), rng.uniform(0, 10)) for _ in range(rng.randint(1, 25))]
    reference = max(directed_hausdorff(numpy.array(a), numpy.array(b))[0],
                    directed_hausdorff(numpy.array(b), numpy.array(a))[0])
    value = ours(multipoint(a), multipoint(b))
    check(abs(value - reference) <= 1e-12 * max(1.0, reference), f"point sets {trial}: {value} vs SciPy {reference}")
    directed = ours(multipoint(a), multipoint(b), "--directed")
    check(abs(directed - directed_hausdorff(numpy.array(a), numpy.array(b))[0]) <= 1e-12 * 10,
          f"directed point sets {trial}")

for trial in range(20):
    line_a = [(rng.uniform(0, 10), rng.uniform(0, 10)) for _ in range(rng.randint(2, 12))]
    line_b = [(rng.uniform(0, 10), rng.uniform(0, 10)) for _ in range(rng.randint(2, 12))]
    text_a = "LINESTRING (" + ", ".join(f"{x!r} {y!r}" for x, y in line_a) + ")"
    text_b = "LINESTRING (" + ", ".join(f"{x!r} {y!r}" for x, y in line_b) + ")"
    fraction = 1 / 128
    shape_a, shape_b = shapely_wkt.loads(text_a), shapely_wkt.loads(text_b)

    def sampled_directed(line, other):
        best = 0.0
        for (x0, y0), (x1, y1) in zip(line, line[1:]):
            for step in range(129):
                t = step * fraction
                best = max(best, Point(x0 + t * (x1 - x0), y0 + t * (y1 - y0)).distance(other))
        return best

    sampled = max(sampled_directed(line_a, shape_b), sampled_directed(line_b, shape_a))
    value = ours(text_a, text_b)
    longest = max(numpy.hypot(numpy.diff(numpy.array(line)[:, 0]), numpy.diff(numpy.array(line)[:, 1])).max()
                  for line in (line_a, line_b))
    check(sampled <= value + 1e-9, f"polylines {trial}: Shapely densified {sampled} above ours {value}")
    check(value - sampled <= fraction * longest / 2 + 1e-9, f"polylines {trial}: ours {value} too far above {sampled}")

print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)

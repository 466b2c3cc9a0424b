// The demo scenario: an invented catalogue of machine parts — brackets, gaskets, clips and
// flanges — with part numbers, materials and revisions, outlines in millimetres. Some parts
// have later revisions that differ only slightly (the near-duplicates a search should find).
// Invented here, not taken from any catalogue; deterministic for a given seed and count.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

namespace waymark::cli {

// One NDJSON line per part, as POST /v1/collections/{name}/shapes takes them:
// {"id": "BRK-10040-A", "geometry": "<WKT>", "metadata": {"family", "material", "revision", ...}}.
std::vector<std::string> demo_catalogue(std::size_t count, std::uint64_t seed);

// `waymark demo-catalogue [--count N] [--seed S]`: prints demo_catalogue() to standard output.
int demo_catalogue_command(const std::vector<std::string>& words);

}  // namespace waymark::cli

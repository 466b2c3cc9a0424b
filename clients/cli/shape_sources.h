// Reading shapes out of the files a bulk load starts from, before they go to the server:
//
//   .geojson, .json  a FeatureCollection, one Feature, or one bare geometry. Shape id: the
//                    feature's "id", or the property named by `id_property`; failing both,
//                    "<file stem>-<feature number>". Metadata: the feature's properties.
//   .wkt, .txt, .tsv one shape per line: "ID<TAB>WKT[<TAB>METADATA-JSON]", or "ID WKT", or a
//                    bare WKT line (id "<file stem>-<line number>"). Blank lines and lines
//                    starting with '#' are skipped.
//   .svg             each <path>, <polyline> and <polygon> element. Shape id: its id attribute,
//                    or "<file stem>-<element number>". Coordinates are taken as written:
//                    transform attributes are not applied, so an element under one is reported,
//                    not loaded with a wrong outline.
//   .ndjson          lines already in the server's bulk format {"id", "geometry", "metadata"}.
//
// Geometry is not parsed here: the server parses and validates it and its rejections are mapped
// back to the `where` of each shape. What is checked here is the file's own structure.
#pragma once

#include <filesystem>
#include <functional>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "sketch/status.h"

namespace waymark::cli {

struct SourceShape {
  std::string id;
  nlohmann::json geometry;  // a GeoJSON geometry object or a WKT / SVG path data string (null:
                            // a plain .ndjson line passed through, SourceOptions)
  nlohmann::json metadata = nlohmann::json::object();
  std::string where;        // "parts/a.geojson: feature 3", "b.wkt: line 12", "c.svg: line 4, <path>"
  // The NDJSON line to send: an .ndjson input line itself when it holds nothing but "id",
  // "geometry" and "metadata", or made from plain text (SourceOptions::pass_plain_text), so
  // that it is sent as read instead of printed again from `geometry` and `metadata`.
  std::string line = {};
};

struct SourceProblem {
  std::string where;
  std::string reason;
};

enum class SourceFormat { geojson, wkt_lines, svg, ndjson };

// The format a file's name implies; nullopt for names this reader does not handle.
std::optional<SourceFormat> format_of(const std::filesystem::path& path);

// Expands files and folders (recursively, in name order) into the files to read. A folder's files
// with other extensions are counted in `skipped`, not reported; a named file with an unknown
// extension, or a path that does not exist, is a problem.
std::vector<std::filesystem::path> collect_input_files(const std::vector<std::string>& operands,
                                                       std::vector<SourceProblem>& problems, std::size_t& skipped);

struct SourceOptions {
  std::string id_property;  // GeoJSON: the property that holds the shape id
  // Plain input passed through as text, unparsed, for the bulk loader, which sends it on:
  //   .ndjson   a line that is an object of "id" (a string of printable ASCII without escapes),
  //             "geometry" (an object, or such a string) and optionally "metadata" (an object)
  //             is emitted with `line` holding it as read;
  //   .geojson  a FeatureCollection whose features all have a geometry object (and properties,
  //             if any, an object) has each feature emitted with `line` made from their text.
  // `geometry` and `metadata` are then left null: the server alone checks them, and its
  // rejections name the file and line or feature. Other input is read as without this option.
  // NDJSON lines and GeoJSON features of 64 vertices went from ~100 µs to a few each
  // (reports/performance-log.md).
  bool pass_plain_text = false;
};

// Reads one file and calls `emit` for every shape in it, in file order. Entries that cannot
// become a shape are added to `problems` with their place; a file that cannot be read or parsed
// at all is one problem. Time and memory are linear in the file's size.
void read_shape_file(const std::filesystem::path& path, const SourceOptions& options,
                     const std::function<void(SourceShape&&)>& emit, std::vector<SourceProblem>& problems);

// About how many shapes read_shape_file would emit, for progress: exact for the formats it
// parses here; for .ndjson the count of non-blank lines (bad lines included), without parsing
// them. 0 for a file that cannot be read.
std::size_t count_shapes(const std::filesystem::path& path, const SourceOptions& options);

}  // namespace waymark::cli

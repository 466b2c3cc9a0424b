// `waymark`: the command line for Waymark. Geometry commands work locally on shape text or
// files; server commands talk to waymarkd over HTTP only.
#include <iostream>
#include <string>
#include <vector>

#include "clients/cli/demo_catalogue.h"
#include "clients/cli/geometry_commands.h"
#include "clients/cli/server_commands.h"

namespace {

constexpr const char* kUsage = R"(usage: waymark COMMAND [options]

Geometry commands (local, no server):
  distance [--metric hausdorff|frechet|discrete-frechet] [--json] [--region] [--directed] A B
      Exact distance between shapes A and B (files, or inline WKT / GeoJSON / SVG path data /
      JSON point arrays). Prints the distance on the first line; --json adds the witness points.
  landmarks [--layout grid|random|fitted] [--count N] [--domain MINX,MINY,MAXX,MAXY]
            [--seed S] [--generation G] [--sample FILE] [--output FILE]
      Writes a landmark file (standard output without --output). fitted needs --sample: a file
      with one shape per line, in the frame given by --frame.
  sketch --landmarks FILE [--json] [--region] SHAPE
      Prints the shape's sketch vector against the landmarks.

Server commands (over HTTP; --server URL or WAYMARK_SERVER, default http://127.0.0.1:7700;
--token TOKEN or WAYMARK_TOKEN):
  ingest COLLECTION PATH... [--id-property NAME] [--batch N] [--connections N] [--resume]
                            [--retries N] [--progress auto|bar|lines|none]
      Loads files and folders: GeoJSON (.geojson, .json), WKT lines "ID<TAB>WKT" (.wkt, .txt,
      .tsv), SVG (.svg: path, polyline and polygon elements) and bulk NDJSON (.ndjson). Retries on
      429/503; --resume skips ids already stored. Lists every rejected input with its place.
      --connections (default 2) batches are sent at once.
  nearest COLLECTION (SHAPE | --id ID) [--k N] [--metric M] [--exact] [--candidates N]
                     [--filter JSON] [--json]
      The k stored shapes nearest to SHAPE (a file or inline text), or to a stored shape.
  stats [COLLECTION] [--json]
      Every collection, or one collection's settings and statistics.
  export COLLECTION [--output FILE]
      Every stored shape as a GeoJSON FeatureCollection.

Demo data:
  demo-catalogue [--count N] [--seed S]
      Prints an invented parts catalogue (brackets, gaskets, clips, flanges; outlines in mm,
      some near-duplicate revisions) as NDJSON lines for POST /v1/collections/NAME/shapes.

Options for every shape operand:
  --format auto|wkt|geojson|svg|points   (default auto)
  --frame absolute|centered|unit         (default absolute)
  --max-vertices N   --curve-tolerance T (SVG curves)
)";

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::string> words(argv + 1, argv + argc);
  if (words.empty() || words[0] == "help" || words[0] == "--help" || words[0] == "-h") {
    std::cout << kUsage;
    return words.empty() ? 2 : 0;
  }
  const std::string command = words[0];
  words.erase(words.begin());
  if (command == "distance") return waymark::cli::distance_command(words);
  if (command == "landmarks") return waymark::cli::landmarks_command(words);
  if (command == "sketch") return waymark::cli::sketch_command(words);
  if (command == "ingest") return waymark::cli::ingest_command(words);
  if (command == "nearest") return waymark::cli::nearest_command(words);
  if (command == "stats") return waymark::cli::stats_command(words);
  if (command == "export") return waymark::cli::export_command(words);
  if (command == "demo-catalogue") return waymark::cli::demo_catalogue_command(words);
  std::cerr << "waymark: unknown command '" << command << "'\n\n" << kUsage;
  return 2;
}

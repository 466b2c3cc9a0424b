// The `waymark` commands that talk to a running waymarkd over HTTP (and only over HTTP):
//
//   ingest COLLECTION PATH...   bulk load files and folders (clients/cli/shape_sources.h)
//   nearest COLLECTION SHAPE    the k nearest stored shapes to a shape, or to a stored one (--id)
//   stats [COLLECTION]          the collections, or one collection's settings and statistics
//   export COLLECTION           every stored shape as a GeoJSON FeatureCollection
//
// Each takes the server address from --server or WAYMARK_SERVER (default
// http://127.0.0.1:7700) and a bearer token from --token or WAYMARK_TOKEN.
//
// Exit status: 0 done; 1 done, but some inputs were rejected (ingest); 2 bad command line;
// 3 the server could not be reached, refused the token or the request, or failed.
#pragma once

#include <string>
#include <vector>

namespace waymark::cli {

int ingest_command(const std::vector<std::string>& words);
int nearest_command(const std::vector<std::string>& words);
int stats_command(const std::vector<std::string>& words);
int export_command(const std::vector<std::string>& words);

}  // namespace waymark::cli

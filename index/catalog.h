// The collections of one data directory, by name.
//
// Layout: <data directory>/collections/<name>/ holds one collection (index/STORE_FORMAT.md).
// Names are 1 to 64 characters from [A-Za-z0-9_-], starting with a letter or digit, so a name
// is always one plain path component (no "..", no separators, no hidden files).
//
// Collections are shared: find() hands out a shared_ptr, so a collection dropped while a query
// still uses it stays usable until that query ends. drop() is atomic on disk: the directory is
// renamed aside (and the rename synced) before it is deleted, so a crash leaves either the
// whole collection or none; leftovers are removed by the next open().
// Thread safety: every member may be called concurrently.
#pragma once

#include <map>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "index/collection.h"

namespace waymark {

class Catalog {
 public:
  // Opens (creating if missing) the data directory and every collection in it. Fails on the
  // first collection that does not open, naming it: a damaged store is never skipped silently.
  // `approximate` applies to the graph and partitioned collections opened or created here.
  static Result<std::unique_ptr<Catalog>> open(const std::string& data_directory,
                                               const ApproximateIndexSettings& approximate = {});

  // invalid_argument (where "name") unless `name` follows the rule above.
  static Status check_name(const std::string& name);

  // already_exists if the name is taken. settings.approximate is replaced by the catalog's.
  Result<std::shared_ptr<Collection>> create(const std::string& name, const CollectionSettings& settings);
  // not_found if there is no such collection.
  Result<std::shared_ptr<Collection>> find(const std::string& name) const;
  Status drop(const std::string& name);
  // Every collection, by name in byte order.
  std::vector<std::pair<std::string, std::shared_ptr<Collection>>> list() const;

 private:
  Catalog(std::string collections_directory, const ApproximateIndexSettings& approximate)
      : collections_directory_(std::move(collections_directory)), approximate_(approximate) {}
  std::string collections_directory_;
  ApproximateIndexSettings approximate_;
  mutable std::mutex mutex_;
  std::map<std::string, std::shared_ptr<Collection>> collections_;
  std::uint64_t drops_ = 0;
};

}  // namespace waymark

#include "index/catalog.h"

#include <chrono>
#include <filesystem>

#include "sketch/durable_file.h"

namespace waymark {
namespace {

namespace fs = std::filesystem;

constexpr const char* kDroppedPrefix = ".dropped-";
constexpr const char* kCreatingSuffix = ".creating";  // Collection::create builds there

}  // namespace

Status Catalog::check_name(const std::string& name) {
  auto allowed = [](char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' || c == '-';
  };
  if (name.empty() || name.size() > 64) return invalid_argument("a collection name has 1 to 64 characters", "name");
  if (name[0] == '_' || name[0] == '-') {
    return invalid_argument("a collection name starts with a letter or digit", "name");
  }
  for (std::size_t i = 0; i < name.size(); ++i) {
    if (!allowed(name[i])) {
      return invalid_argument("a collection name may hold only letters, digits, '_' and '-' (character " +
                                  std::to_string(i + 1) + " is not one)",
                              "name");
    }
  }
  return Status::ok();
}

Result<std::unique_ptr<Catalog>> Catalog::open(const std::string& data_directory,
                                               const ApproximateIndexSettings& approximate) {
  const fs::path collections = fs::path(data_directory) / "collections";
  std::error_code error;
  fs::create_directories(collections, error);
  if (error) {
    return Status(StatusCode::io_error, "cannot create '" + collections.string() + "': " + error.message());
  }
  std::unique_ptr<Catalog> catalog(new Catalog(collections.string(), approximate));
  for (const fs::directory_entry& entry : fs::directory_iterator(collections, error)) {
    const std::string name = entry.path().filename().string();
    if (name.starts_with(kDroppedPrefix) || name.ends_with(kCreatingSuffix)) {
      fs::remove_all(entry.path(), error);  // a drop or a create that a crash interrupted
      continue;
    }
    if (!entry.is_directory() || !check_name(name).is_ok()) continue;  // not ours
    Result<std::unique_ptr<Collection>> collection = Collection::open(entry.path().string(), approximate);
    if (!collection) {
      const Status& failed = collection.status();
      return Status(failed.code(), "collection '" + name + "': " + failed.message(), failed.where());
    }
    catalog->collections_.emplace(name, std::move(*collection));
  }
  if (error) return Status(StatusCode::io_error, "cannot list '" + collections.string() + "': " + error.message());
  return catalog;
}

Result<std::shared_ptr<Collection>> Catalog::create(const std::string& name, const CollectionSettings& settings) {
  if (Status s = check_name(name); !s.is_ok()) return s;
  std::lock_guard lock(mutex_);
  if (collections_.contains(name)) return Status(StatusCode::already_exists, "collection '" + name + "' exists");
  CollectionSettings with_catalog_settings = settings;
  with_catalog_settings.approximate = approximate_;
  Result<std::unique_ptr<Collection>> created =
      Collection::create((fs::path(collections_directory_) / name).string(), with_catalog_settings);
  if (!created) return created.status();
  std::shared_ptr<Collection> shared = std::move(*created);
  collections_.emplace(name, shared);
  return shared;
}

Result<std::shared_ptr<Collection>> Catalog::find(const std::string& name) const {
  std::lock_guard lock(mutex_);
  auto found = collections_.find(name);
  if (found == collections_.end()) return Status(StatusCode::not_found, "no collection named '" + name + "'");
  return found->second;
}

Status Catalog::drop(const std::string& name) {
  std::lock_guard lock(mutex_);
  auto found = collections_.find(name);
  if (found == collections_.end()) return Status(StatusCode::not_found, "no collection named '" + name + "'");
  const fs::path from = fs::path(collections_directory_) / name;
  const fs::path aside = fs::path(collections_directory_) / (kDroppedPrefix + name + "-" + std::to_string(++drops_));
  std::error_code error;
  fs::rename(from, aside, error);
  if (error) return Status(StatusCode::io_error, "cannot drop '" + name + "': " + error.message());
  if (Status s = sync_parent_directory(aside.string()); !s.is_ok()) return s;
  collections_.erase(found);
  // Queries still holding the collection keep reading their open files; the directory goes now.
  fs::remove_all(aside, error);
  return Status::ok();
}

std::vector<std::pair<std::string, std::shared_ptr<Collection>>> Catalog::list() const {
  std::lock_guard lock(mutex_);
  return {collections_.begin(), collections_.end()};
}

}  // namespace waymark

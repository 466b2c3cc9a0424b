// The drawing-search page (clients/web), compiled into waymarkd by cmake/embed_web_assets.cmake
// and served at / and /ui/{file} without a token: the page holds no data, and every API call it
// makes is checked like any other client's.
#pragma once

#include <string_view>
#include <vector>

namespace waymark::server {

struct WebAsset {
  std::string_view name;          // file name in clients/web, e.g. "app.js"
  std::string_view content_type;  // from the extension
  std::string_view body;
};

const std::vector<WebAsset>& web_assets();

}  // namespace waymark::server

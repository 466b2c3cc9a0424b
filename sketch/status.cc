#include "sketch/status.h"

namespace waymark {

const char* status_code_name(StatusCode code) {
  switch (code) {
    case StatusCode::ok: return "ok";
    case StatusCode::invalid_argument: return "invalid_argument";
    case StatusCode::not_applicable: return "not_applicable";
    case StatusCode::not_found: return "not_found";
    case StatusCode::already_exists: return "already_exists";
    case StatusCode::resource_exhausted: return "resource_exhausted";
    case StatusCode::storage_full: return "storage_full";
    case StatusCode::data_loss: return "data_loss";
    case StatusCode::io_error: return "io_error";
    case StatusCode::failed_precondition: return "failed_precondition";
    case StatusCode::internal: return "internal";
  }
  return "unknown";
}

std::string Status::to_string() const {
  if (is_ok()) return "ok";
  if (where_.empty()) return message_;
  return message_ + " (at " + where_ + ")";
}

}  // namespace waymark

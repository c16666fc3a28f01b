#include "indexer/base/status.h"

namespace sightfix {

const char* StatusCodeName(StatusCode code) {
  switch (code) {
    case StatusCode::kOk:
      return "OK";
    case StatusCode::kInvalidArgument:
      return "invalid argument";
    case StatusCode::kNotFound:
      return "not found";
    case StatusCode::kIoError:
      return "I/O error";
    case StatusCode::kCorrupt:
      return "corrupt";
    case StatusCode::kFailedPrecondition:
      return "failed precondition";
    case StatusCode::kInternal:
      return "internal error";
  }
  return "unknown";
}

Status::Status(StatusCode code, std::string message) {
  if (code != StatusCode::kOk) state_ = std::make_shared<State>(State{code, std::move(message)});
}

const std::string& Status::message() const {
  static const std::string kEmpty;
  return ok() ? kEmpty : state_->message;
}

std::string Status::ToString() const {
  if (ok()) return "OK";
  return std::string(StatusCodeName(state_->code)) + ": " + state_->message;
}

}  // namespace sightfix

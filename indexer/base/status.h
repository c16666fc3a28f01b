// Status and Result<T>: how sightfix reports failure across library boundaries.
//
// A Status is OK or carries a code and a human-readable message naming what failed and where
// (file, line, field). An OK status allocates nothing. Result<T> holds either a value or a
// non-OK Status. Exceptions thrown by OpenCV, FAISS or the standard library are caught at the
// edge of our code and turned into a Status with context; they never cross our public API.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <utility>

namespace sightfix {

enum class StatusCode {
  kOk = 0,
  kInvalidArgument,  // the caller's input is malformed or out of range
  kNotFound,         // a named file, tile or record does not exist
  kIoError,          // the operating system refused a read or write
  kCorrupt,          // stored data fails a checksum, schema or consistency check
  kFailedPrecondition,
  kInternal,  // our own bug, or an unexpected library exception
};

const char* StatusCodeName(StatusCode code);

class Status {
 public:
  Status() = default;  // OK
  Status(StatusCode code, std::string message);

  static Status Ok() { return Status(); }
  static Status InvalidArgument(std::string m) {
    return {StatusCode::kInvalidArgument, std::move(m)};
  }
  static Status NotFound(std::string m) { return {StatusCode::kNotFound, std::move(m)}; }
  static Status IoError(std::string m) { return {StatusCode::kIoError, std::move(m)}; }
  static Status Corrupt(std::string m) { return {StatusCode::kCorrupt, std::move(m)}; }
  static Status Internal(std::string m) { return {StatusCode::kInternal, std::move(m)}; }

  bool ok() const { return state_ == nullptr; }
  StatusCode code() const { return ok() ? StatusCode::kOk : state_->code; }
  // Empty for OK.
  const std::string& message() const;
  // "OK" or "<code name>: <message>".
  std::string ToString() const;

 private:
  struct State {
    StatusCode code;
    std::string message;
  };
  std::shared_ptr<const State> state_;  // null means OK
};

template <typename T>
class Result {
 public:
  Result(T value) : value_(std::move(value)) {}  // NOLINT: implicit by design
  // REQUIRES: !status.ok()
  Result(Status status) : status_(std::move(status)) {}  // NOLINT: implicit by design

  bool ok() const { return status_.ok(); }
  const Status& status() const { return status_; }
  // REQUIRES: ok()
  const T& value() const& { return *value_; }
  T& value() & { return *value_; }
  T&& value() && { return std::move(*value_); }
  const T& operator*() const& { return *value_; }
  const T* operator->() const { return &*value_; }
  T* operator->() { return &*value_; }

 private:
  Status status_;
  std::optional<T> value_;
};

}  // namespace sightfix

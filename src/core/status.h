// Errors as values at module borders.
//
// A Status is ok() or carries a code and a message that a person can act on
// (it names the file, line and field where that applies). Result<T> is a value
// or a Status. Library code never calls exit() or throws across a module
// border; src/cli maps a Status code to the documented exit code.
#pragma once

#include <string>
#include <utility>
#include <variant>

namespace prefsift {

enum class StatusCode {
  kOk = 0,
  kUsage,      // bad command line, plan or rule file: the run does not start
  kInput,      // an input file cannot be read or is not what it must be
  kIo,         // writing an output failed (disk full, permission)
  kLimit,      // a configured limit was exceeded and the user asked to stop
  kInternal,   // a bug or resource failure (e.g. regex engine out of memory)
  kEmptyInput,   // an input file holds no record at all
  kLayoutSuspect,  // one ingest reason rejects most of a file: almost always a layout mistake
};

class Status {
 public:
  Status() = default;
  static Status Ok() { return Status(); }
  static Status Usage(std::string m) { return Status(StatusCode::kUsage, std::move(m)); }
  static Status Input(std::string m) { return Status(StatusCode::kInput, std::move(m)); }
  static Status Io(std::string m) { return Status(StatusCode::kIo, std::move(m)); }
  static Status Limit(std::string m) { return Status(StatusCode::kLimit, std::move(m)); }
  static Status Internal(std::string m) { return Status(StatusCode::kInternal, std::move(m)); }
  static Status EmptyInput(std::string m) { return Status(StatusCode::kEmptyInput, std::move(m)); }
  static Status LayoutSuspect(std::string m) { return Status(StatusCode::kLayoutSuspect, std::move(m)); }

  bool ok() const { return code_ == StatusCode::kOk; }
  StatusCode code() const { return code_; }
  const std::string& message() const { return message_; }

 private:
  Status(StatusCode c, std::string m) : code_(c), message_(std::move(m)) {}
  StatusCode code_ = StatusCode::kOk;
  std::string message_;
};

// A value or an error. REQUIRES: value() only when ok().
template <typename T>
class Result {
 public:
  Result(T value) : v_(std::move(value)) {}          // NOLINT: implicit by design
  Result(Status status) : v_(std::move(status)) {}   // NOLINT: implicit by design
  bool ok() const { return std::holds_alternative<T>(v_); }
  const Status& status() const {
    static const Status kOkStatus;
    return ok() ? kOkStatus : std::get<Status>(v_);
  }
  T& value() & { return std::get<T>(v_); }
  const T& value() const& { return std::get<T>(v_); }
  T&& value() && { return std::get<T>(std::move(v_)); }

 private:
  std::variant<T, Status> v_;
};

}  // namespace prefsift

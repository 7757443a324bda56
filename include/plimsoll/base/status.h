#pragma once
// Status and Result<T>: how run-time failures travel in plimsoll.
//
// Run-time errors (bad payloads, SQLITE_BUSY, Kafka errors, numeric failure) are returned, never
// thrown; exceptions are reserved for start-up and constructors. Both types are [[nodiscard]]:
// dropping an error must be an explicit, searchable call to IgnoreError().
//
// Thread-safety: value types; distinct objects may be used from distinct threads freely.

#include <cassert>
#include <string>
#include <string_view>
#include <utility>
#include <variant>

namespace plimsoll {

// Never renumber: codes are stored in the dead-letter table.
enum class StatusCode : int {
  kOk = 0,
  kInvalidArgument = 1,  // the caller's input is wrong (bad record, bad config value)
  kNotFound = 2,
  kOutOfRange = 3,       // a value outside the region a computation supports
  kNumericFailure = 4,   // non-finite or non-positive quantity where the model forbids it
  kIoError = 5,
  kBusy = 6,             // retry later (SQLITE_BUSY, full queue)
  kCorruption = 7,
  kUnavailable = 8,      // a dependency (broker, disk) cannot be reached now
  kAborted = 9,          // stopped on request (shutdown, budget exhausted)
  kInternal = 10,
};

// Returns a stable lower-case name, e.g. "invalid argument".
std::string_view StatusCodeName(StatusCode code);

class [[nodiscard]] Status {
 public:
  Status() = default;  // OK
  static Status Ok() { return Status(); }
  static Status InvalidArgument(std::string msg) { return {StatusCode::kInvalidArgument, std::move(msg)}; }
  static Status NotFound(std::string msg) { return {StatusCode::kNotFound, std::move(msg)}; }
  static Status OutOfRange(std::string msg) { return {StatusCode::kOutOfRange, std::move(msg)}; }
  static Status NumericFailure(std::string msg) { return {StatusCode::kNumericFailure, std::move(msg)}; }
  static Status IoError(std::string msg) { return {StatusCode::kIoError, std::move(msg)}; }
  static Status Busy(std::string msg) { return {StatusCode::kBusy, std::move(msg)}; }
  static Status Corruption(std::string msg) { return {StatusCode::kCorruption, std::move(msg)}; }
  static Status Unavailable(std::string msg) { return {StatusCode::kUnavailable, std::move(msg)}; }
  static Status Aborted(std::string msg) { return {StatusCode::kAborted, std::move(msg)}; }
  static Status Internal(std::string msg) { return {StatusCode::kInternal, std::move(msg)}; }

  bool ok() const { return code_ == StatusCode::kOk; }
  StatusCode code() const { return code_; }
  const std::string& message() const { return message_; }

  // "invalid argument: line 3: value is not a number"; "ok" for success.
  std::string ToString() const;

  // Returns a copy whose message is "<context>: <message>"; OK stays OK.
  Status WithContext(std::string_view context) const;

  friend bool operator==(const Status& a, const Status& b) {
    return a.code_ == b.code_ && a.message_ == b.message_;
  }

 private:
  Status(StatusCode code, std::string msg) : code_(code), message_(std::move(msg)) {}
  StatusCode code_ = StatusCode::kOk;
  std::string message_;
};

// Drops a status on purpose. Every call site is a decision; grep for it.
inline void IgnoreError(const Status&) {}

// Either a value or a non-OK Status.
// REQUIRES: value() only when ok(); status() is OK exactly when a value is held.
template <typename T>
class [[nodiscard]] Result {
 public:
  Result(T value) : data_(std::move(value)) {}  // NOLINT(google-explicit-constructor)
  Result(Status status) : data_(std::move(status)) {  // NOLINT(google-explicit-constructor)
    assert(!std::get<Status>(data_).ok() && "Result built from an OK status has no value");
  }

  bool ok() const { return std::holds_alternative<T>(data_); }
  Status status() const { return ok() ? Status::Ok() : std::get<Status>(data_); }

  T& value() & { return std::get<T>(data_); }
  const T& value() const& { return std::get<T>(data_); }
  T&& value() && { return std::get<T>(std::move(data_)); }
  T* operator->() { return &value(); }
  const T* operator->() const { return &value(); }
  T& operator*() & { return value(); }
  const T& operator*() const& { return value(); }

 private:
  std::variant<T, Status> data_;
};

}  // namespace plimsoll

// Returns early from the enclosing function when `expr` yields a non-OK Status.
#define PLIMSOLL_RETURN_IF_ERROR(expr)             \
  do {                                             \
    ::plimsoll::Status plimsoll_status_ = (expr);  \
    if (!plimsoll_status_.ok()) return plimsoll_status_; \
  } while (0)

#include "plimsoll/base/status.h"

namespace plimsoll {

std::string_view StatusCodeName(StatusCode code) {
  switch (code) {
    case StatusCode::kOk: return "ok";
    case StatusCode::kInvalidArgument: return "invalid argument";
    case StatusCode::kNotFound: return "not found";
    case StatusCode::kOutOfRange: return "out of range";
    case StatusCode::kNumericFailure: return "numeric failure";
    case StatusCode::kIoError: return "io error";
    case StatusCode::kBusy: return "busy";
    case StatusCode::kCorruption: return "corruption";
    case StatusCode::kUnavailable: return "unavailable";
    case StatusCode::kAborted: return "aborted";
    case StatusCode::kInternal: return "internal";
  }
  return "unknown";
}

std::string Status::ToString() const {
  if (ok()) return "ok";
  std::string out(StatusCodeName(code_));
  if (!message_.empty()) {
    out += ": ";
    out += message_;
  }
  return out;
}

Status Status::WithContext(std::string_view context) const {
  if (ok()) return *this;
  std::string msg(context);
  msg += ": ";
  msg += message_;
  return Status(code_, std::move(msg));
}

}  // namespace plimsoll

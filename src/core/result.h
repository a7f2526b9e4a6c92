// Result<T>: a value or an Error, for failures that are expected on the data
// path (a bad line, a bad config value). Exceptions are kept for the truly
// unexpected and are caught at the top of each command.
#pragma once

#include <string>
#include <utility>
#include <variant>

namespace tallyd {

struct Error {
  std::string message;  // complete, human-readable; names file/line/key where known
};

template <class T>
class Result {
 public:
  Result(T value) : v_(std::move(value)) {}          // NOLINT: implicit by design
  Result(Error error) : v_(std::move(error)) {}      // NOLINT: implicit by design

  bool ok() const { return std::holds_alternative<T>(v_); }
  explicit operator bool() const { return ok(); }

  // Preconditions: ok() for value(), !ok() for error().
  T& value() & { return std::get<T>(v_); }
  const T& value() const& { return std::get<T>(v_); }
  T&& value() && { return std::get<T>(std::move(v_)); }
  const Error& error() const { return std::get<Error>(v_); }

  T* operator->() { return &value(); }
  const T* operator->() const { return &value(); }
  T& operator*() & { return value(); }
  const T& operator*() const& { return value(); }

 private:
  std::variant<T, Error> v_;
};

// For operations that return nothing on success.
struct Ok {};
using Status = Result<Ok>;

}  // namespace tallyd

#pragma once
// One exception type for the project, with a category that decides the CLI exit code:
//   kUsage  -> exit 2 (bad command line or options),
//   kInput  -> exit 3 (bad input data: file, field, value),
//   kNumeric-> exit 4 (numerical failure: divergence, non-convergence where fatal),
//   kInternal -> exit 1.
// Messages are complete sentences that name the file, the field and what was expected.

#include <stdexcept>
#include <string>

namespace sw {

enum class ErrorKind { kUsage, kInput, kNumeric, kInternal };

class Error : public std::runtime_error {
 public:
  Error(ErrorKind kind, const std::string& message) : std::runtime_error(message), kind_(kind) {}
  ErrorKind kind() const { return kind_; }
  int exit_code() const {
    switch (kind_) {
      case ErrorKind::kUsage:
        return 2;
      case ErrorKind::kInput:
        return 3;
      case ErrorKind::kNumeric:
        return 4;
      default:
        return 1;
    }
  }

 private:
  ErrorKind kind_;
};

inline Error usage_error(const std::string& m) { return Error(ErrorKind::kUsage, m); }
inline Error input_error(const std::string& m) { return Error(ErrorKind::kInput, m); }
inline Error numeric_error(const std::string& m) { return Error(ErrorKind::kNumeric, m); }

}  // namespace sw

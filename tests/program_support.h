#pragma once
// Helpers shared by the stand-alone programs under tests/ (the validation sweeps, the fuzz
// driver): the check of the positional arguments.

#include <cstdio>

namespace sw::test {

/// True when at least `count` arguments follow the program name; otherwise prints
/// "usage: <program> <usage>" on stderr and returns false (the program then exits with 2).
inline bool has_arguments(int argc, char** argv, int count, const char* usage) {
  if (argc > count) return true;
  std::fprintf(stderr, "usage: %s %s\n", argv[0], usage);
  return false;
}

}  // namespace sw::test

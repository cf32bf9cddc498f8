#pragma once
// Checks shared by the test files: the message of the sw::Error a call must throw, and the
// validate() messages of an options struct with bad values.

#include <catch2/catch.hpp>

#include <exception>
#include <functional>
#include <string>
#include <vector>

#include "retrieval/core/error.h"

namespace sw::test {

/// The message of the sw::Error of kind `kind` that `f()` throws. Fails the test (and returns
/// "") when f returns normally or throws anything else.
template <class F>
std::string error_message(F&& f, ErrorKind kind) {
  try {
    f();
  } catch (const Error& e) {
    CHECK(e.kind() == kind);
    return e.what();
  } catch (const std::exception& e) {
    FAIL("expected sw::Error, got std::exception: " << e.what());
  }
  FAIL("expected sw::Error, but the call returned");
  return {};
}

/// One field of an Options struct set to a bad value, and a text validate()'s message must hold.
template <class Options>
struct BadValue {
  std::function<void(Options&)> change;
  std::string message_holds;
};

/// Default Options validate; each bad value gives a validate() message holding its text (the
/// options convention of DEVELOPERS.md: the message names the field and its value).
template <class Options>
void check_validation(const std::vector<BadValue<Options>>& bad) {
  CHECK(Options().validate().empty());
  for (const BadValue<Options>& b : bad) {
    Options o;
    b.change(o);
    CHECK_THAT(o.validate(), Catch::Contains(b.message_holds));
  }
}

}  // namespace sw::test

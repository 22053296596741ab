// doctest printing of rowfold values.
#pragma once

#include <doctest/doctest.h>

#include "rowfold/status.hpp"

namespace doctest {
template <>
struct StringMaker<rowfold::Status> {
  static String convert(rowfold::Status s) { return rowfold::nameOf(s); }
};
}  // namespace doctest

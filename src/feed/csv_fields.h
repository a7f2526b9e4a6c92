// CsvFields: splits one CSV line into its fields.
//
// Fields are separated by ','. A field may be quoted as in RFC 4180:
// "a, b" is the text a, b and "" inside quotes is one '"'. Quoted text is kept
// exactly; unquoted fields lose the spaces and tabs at either end, and a '"'
// inside an unquoted field is kept as a plain character. Unlike RFC 4180, a
// quoted field cannot span lines: the input is already split into lines.
//
// Reuses its buffers from line to line, so splitting does not allocate once
// they have grown to the longest line. Not thread-safe.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <vector>

#include "core/result.h"

namespace tallyd {

class CsvFields {
 public:
  // Splits `line` (without its line end). An empty line has one empty field.
  // Fails, with a message naming the 1-based field number, on a quoted field
  // that is not closed or is followed by anything but blanks and ','.
  // The fields stay readable until the next split(); they point into `line`
  // or into this object, so `line` must outlive them as well.
  Status split(std::string_view line);
  // The usual case of split(), without a Status to build: splits `line` and
  // returns true when no field opens with '"' (after blanks); false, with
  // the fields unspecified, when one does, and then split() must read it
  // (split() tries this first, so such a line is scanned twice: quoted
  // fields are rare, and the scan is a few hundred instructions).
  bool split_unquoted(std::string_view line);

  std::size_t size() const { return fields_.size(); }
  // Precondition: i < size().
  std::string_view operator[](std::size_t i) const { return fields_[i]; }

 private:
  std::vector<std::string_view> fields_;
  std::string unescaped_;  // quoted fields that contained "" escapes
};

}  // namespace tallyd

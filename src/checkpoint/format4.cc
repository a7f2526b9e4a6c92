#include "checkpoint/format4.h"

#include <fmt/format.h>

#include "checkpoint/parts.h"
#include "core/state_codec.h"

namespace tallyd::checkpoint {
namespace {

std::uint64_t fnv1a(std::string_view bytes) {
  std::uint64_t h = 14695981039346656037ull;
  for (unsigned char c : bytes) {
    h ^= c;
    h *= 1099511628211ull;
  }
  return h;
}

}  // namespace

std::string format4_rest(const Engine& engine, const Marks& marks) {
  StateWriter w;
  save_marks(w, marks);
  engine.save_state(w);
  w.newline();
  std::string body = w.take();
  return fmt::format("{}seal {:016x} {}\n", body, fnv1a(body), body.size());
}

Result<Restored> decode_format4(std::string_view rest, std::string_view name, const SettingsTable& settings,
                                EngineLimits limits, detect::FdrSpec fdr) {
  // The seal is the last line; anything cut short has none (or a wrong one).
  const std::size_t seal_at = rest.rfind("seal ");
  if (seal_at == std::string_view::npos || rest.empty() || rest.back() != '\n' ||
      (seal_at > 0 && rest[seal_at - 1] != '\n'))
    return Error{fmt::format("{}: checkpoint is truncated (no seal line at its end); refusing to load it", name)};
  std::string_view body = rest.substr(0, seal_at);
  const std::string_view hex = rest.substr(seal_at + 5, 16);
  std::uint64_t sum = 0;
  bool hex_ok = hex.size() == 16;
  for (char c : hex) {
    const int v = (c >= '0' && c <= '9') ? c - '0' : (c >= 'a' && c <= 'f') ? c - 'a' + 10 : -1;
    if (v < 0) hex_ok = false;
    sum = sum * 16 + static_cast<std::uint64_t>(v < 0 ? 0 : v);
  }
  StateReader len_reader(rest.substr(std::min(rest.size(), seal_at + 5 + 16)));
  const std::uint64_t len = len_reader.u64();
  if (!hex_ok || len_reader.failed() || !len_reader.at_end())
    return Error{fmt::format("{}: checkpoint seal line is damaged; refusing to load it", name)};
  if (len != body.size())
    return Error{fmt::format("{}: checkpoint is truncated or damaged ({} body bytes, the seal says {}); "
                             "refusing to load it",
                             name, body.size(), len)};
  if (fnv1a(body) != sum)
    return Error{fmt::format("{}: checkpoint is corrupt (checksum mismatch); refusing to load it", name)};

  StateReader r(body);
  Restored out;
  out.marks = load_marks(r);
  out.engine = std::make_unique<Engine>(settings, limits, fdr);
  out.engine->load_state(r);
  if (!r.failed() && !r.at_end()) r.fail("unexpected data after the engine state");
  if (r.failed())
    return Error{fmt::format("{}: checkpoint does not match this build or config ({}); refusing to load it", name,
                             r.error())};
  return out;
}

}  // namespace tallyd::checkpoint

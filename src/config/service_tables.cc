#include "config/service_tables.h"

#include <set>

#include <fmt/format.h>

namespace tallyd {
namespace {

class ServiceReader {
 public:
  explicit ServiceReader(std::string_view source) : source_(source) {}
  std::string error;

  void fail(const toml::node& n, std::string_view key, std::string_view what) {
    if (error.empty()) error = fmt::format("{}:{}: {}: {}", source_, n.source().begin.line, key, what);
  }
  void keys(const toml::table& t, std::string_view prefix, const std::set<std::string_view>& allowed) {
    for (const auto& [k, v] : t)
      if (!allowed.count(k.str())) {
        std::string list;
        for (std::string_view a : allowed) list += (list.empty() ? "" : ", ") + std::string(a);
        fail(v, fmt::format("{}.{}", prefix, k.str()), fmt::format("unknown key (expected one of: {})", list));
      }
  }
  bool str(const toml::table& t, std::string_view key, std::string_view prefix, std::string& out) {
    const toml::node* n = t.get(key);
    if (!n) return false;
    if (!n->is_string()) {
      fail(*n, fmt::format("{}.{}", prefix, key), "must be a string");
      return false;
    }
    out = n->as_string()->get();
    return true;
  }
  template <class T>
  bool integer(const toml::table& t, std::string_view key, std::string_view prefix, std::int64_t lo,
               std::int64_t hi, T& out) {
    const toml::node* n = t.get(key);
    if (!n) return false;
    if (!n->is_integer() || n->as_integer()->get() < lo || n->as_integer()->get() > hi) {
      fail(*n, fmt::format("{}.{}", prefix, key), fmt::format("must be an integer from {} to {}", lo, hi));
      return false;
    }
    out = static_cast<T>(n->as_integer()->get());
    return true;
  }
  const toml::table* table(const toml::table& root, std::string_view key) {
    const toml::node* n = root.get(key);
    if (!n) return nullptr;
    if (!n->is_table()) fail(*n, key, "must be a table");
    return n->as_table();
  }

  void source(const toml::table& t, std::size_t index, SourceConfig& s) {
    const std::string p = fmt::format("source[{}]", index);
    keys(t, p, {"name", "kind", "path", "address", "port", "format", "columns"});
    std::string kind;
    if (!str(t, "kind", p, kind)) {
      if (error.empty()) fail(t, p + ".kind", "is required: one of follow, tcp, udp, stdin");
      return;
    }
    if (kind == "follow") s.kind = SourceKind::follow;
    else if (kind == "tcp") s.kind = SourceKind::tcp;
    else if (kind == "udp") s.kind = SourceKind::udp;
    else if (kind == "stdin") s.kind = SourceKind::stdin_;
    else {
      fail(*t.get("kind"), p + ".kind", fmt::format("'{}' is not one of follow, tcp, udp, stdin", kind));
      return;
    }
    s.name = fmt::format("{}-{}", kind, index);
    str(t, "name", p, s.name);
    str(t, "path", p, s.path);
    str(t, "address", p, s.address);
    integer(t, "port", p, 0, 65535, s.port);
    str(t, "format", p, s.format);
    str(t, "columns", p, s.columns);
    if (s.kind == SourceKind::follow && s.path.empty()) fail(t, p + ".path", "is required for kind = \"follow\"");
    if (s.kind != SourceKind::follow && t.get("path")) fail(*t.get("path"), p + ".path", "only for kind = \"follow\"");
    if (!s.format.empty() && s.format != "csv" && s.format != "jsonl")
      fail(*t.get("format"), p + ".format", "must be \"csv\" or \"jsonl\"");
    if (s.kind == SourceKind::udp && s.format == "csv" && s.columns.empty())
      fail(t, p + ".columns", "is required for a udp source with format = \"csv\" (the header of every datagram)");
  }

 private:
  std::string source_;
};

}  // namespace

std::string read_service_tables(const toml::table& root, std::string_view source, ServiceConfig& out) {
  ServiceReader r(source);
  if (const toml::node* n = root.get("source")) {
    const toml::array* arr = n->as_array();
    if (!arr) r.fail(*n, "source", "must be an array of tables ([[source]])");
    std::set<std::string> names;
    for (std::size_t i = 0; arr && i < arr->size() && r.error.empty(); ++i) {
      const toml::table* t = (*arr)[i].as_table();
      if (!t) {
        r.fail((*arr)[i], fmt::format("source[{}]", i), "must be a table");
        break;
      }
      SourceConfig s;
      r.source(*t, i, s);
      if (r.error.empty() && !names.insert(s.name).second)
        r.fail(*t, fmt::format("source[{}].name", i), fmt::format("'{}' is used by another source", s.name));
      out.sources.push_back(std::move(s));
    }
  }
  if (const toml::table* t = r.table(root, "output")) {
    r.keys(*t, "output", {"alerts", "text"});
    r.str(*t, "alerts", "output", out.alerts_path);
    r.str(*t, "text", "output", out.text_path);
    if (out.alerts_path.empty()) r.fail(*t, "output.alerts", "must not be empty");
  }
  if (const toml::table* t = r.table(root, "checkpoint")) {
    r.keys(*t, "checkpoint", {"path", "every"});
    r.str(*t, "path", "checkpoint", out.checkpoint_path);
    std::string every;
    if (r.str(*t, "every", "checkpoint", every)) {
      auto d = parse_duration(every);
      if (!d) r.fail(*t->get("every"), "checkpoint.every", d.error().message);
      else out.checkpoint_every = *d;
    }
  }
  if (const toml::table* t = r.table(root, "status")) {
    r.keys(*t, "status", {"enabled", "address", "port"});
    if (const toml::node* n = t->get("enabled")) {
      if (!n->is_boolean()) r.fail(*n, "status.enabled", "must be true or false");
      else out.status_enabled = n->as_boolean()->get();
    }
    r.str(*t, "address", "status", out.status_address);
    r.integer(*t, "port", "status", 0, 65535, out.status_port);
  }
  if (const toml::table* t = r.table(root, "intake")) {
    r.keys(*t, "intake", {"max_line_bytes", "max_connections", "max_datagram_bytes", "poll_ms", "clock"});
    std::string clock;
    if (r.str(*t, "clock", "intake", clock)) {
      if (clock == "data") out.wall_clock = false;
      else if (clock == "wall") out.wall_clock = true;
      else r.fail(*t->get("clock"), "intake.clock", fmt::format("'{}' is not one of data, wall", clock));
    }
    r.integer(*t, "max_line_bytes", "intake", 64, 64 * 1024 * 1024, out.max_line_bytes);
    r.integer(*t, "max_connections", "intake", 1, 100000, out.max_connections);
    r.integer(*t, "max_datagram_bytes", "intake", 64, 65507, out.max_datagram_bytes);
    r.integer(*t, "poll_ms", "intake", 10, 60000, out.poll_ms);
  }
  return r.error;
}

}  // namespace tallyd

#include "config/config.h"

#include <fstream>
#include <set>
#include <sstream>

#include <fmt/format.h>
#include <toml++/toml.h>

#include "config/service_tables.h"

namespace tallyd {
namespace {

// Collects the first error with its position; parsing stops at the first one.
class Reader {
 public:
  explicit Reader(std::string_view source) : source_(source) {}

  bool failed() const { return !error_.empty(); }
  const std::string& error() const { return error_; }

  void fail(const toml::node& node, std::string_view key, std::string_view what) {
    if (failed()) return;
    error_ = fmt::format("{}:{}: {}: {}", source_, node.source().begin.line, key, what);
  }

  // Every key of `table` must be in `allowed`.
  void check_keys(const toml::table& table, std::string_view prefix, const std::set<std::string_view>& allowed) {
    for (const auto& [k, v] : table) {
      if (!allowed.count(k.str())) {
        std::string list;
        for (std::string_view a : allowed) list += (list.empty() ? "" : ", ") + std::string(a);
        fail(v, join(prefix, k.str()), fmt::format("unknown key (expected one of: {})", list));
      }
    }
  }

  static std::string join(std::string_view prefix, std::string_view key) {
    return prefix.empty() ? std::string(key) : fmt::format("{}.{}", prefix, key);
  }

  template <class T>
  const T* get(const toml::table& t, std::string_view key, std::string_view prefix, std::string_view type_name) {
    const toml::node* n = t.get(key);
    if (!n) return nullptr;
    const T* v = n->as<T>();
    if (!v) fail(*n, join(prefix, key), fmt::format("must be {}", type_name));
    return v;
  }

  void read_model(const toml::table& t, std::string_view prefix, ModelSpec& m) {
    check_keys(t, prefix, {"family", "link", "trend", "covariates", "seasons", "window", "min_history", "refit_every", "refit_on_doubt",
                           "reweight", "reweight_threshold", "reweight_rounds", "reweight_mean_correction", "alerted_weight",
                           "guard_records", "cadence_from", "doubt_factor", "step_between_refits"});
    if (auto* v = get<toml::value<int64_t>>(t, "cadence_from", prefix, "an integer")) {
      if (v->get() < 0 || v->get() > 1000000) fail(*v, join(prefix, "cadence_from"), "must be between 0 and 1000000");
      else m.cadence_from = static_cast<std::size_t>(v->get());
    }
    if (auto* v = get<toml::value<int64_t>>(t, "guard_records", prefix, "an integer")) {
      if (v->get() < 0 || v->get() > 1000) fail(*v, join(prefix, "guard_records"), "must be between 0 and 1000");
      else m.guard_records = static_cast<std::size_t>(v->get());
    }
    if (auto* v = get<toml::value<bool>>(t, "reweight", prefix, "true or false")) m.reweight = v->get();
    if (auto* v = get<toml::value<bool>>(t, "reweight_mean_correction", prefix, "true or false"))
      m.reweight_mean_correction = v->get();
    if (auto* v = get<toml::value<int64_t>>(t, "reweight_rounds", prefix, "an integer")) {
      if (v->get() < 1 || v->get() > 10) fail(*v, join(prefix, "reweight_rounds"), "must be between 1 and 10");
      else m.reweight_rounds = static_cast<std::size_t>(v->get());
    }
    if (const toml::node* n = t.get("reweight_threshold")) {
      std::optional<double> v = n->value<double>();
      if (!v || !(*v >= 1 && *v <= 10)) fail(*n, join(prefix, "reweight_threshold"), "must be a number between 1 and 10");
      else m.reweight_threshold = *v;
    }
    if (const toml::node* n = t.get("alerted_weight")) {
      std::optional<double> v = n->value<double>();
      if (!v || !(*v >= 0 && *v <= 1)) fail(*n, join(prefix, "alerted_weight"), "must be a number between 0 and 1");
      else m.alerted_weight = *v;
    }
    if (const toml::node* n = t.get("doubt_factor")) {
      std::optional<double> v = n->value<double>();
      if (!v || !(*v >= 1 && *v <= 1e6)) fail(*n, join(prefix, "doubt_factor"), "must be a number between 1 and 1000000");
      else m.doubt_factor = *v;
    }
    if (auto* v = get<toml::value<std::string>>(t, "family", prefix, "a string")) {
      if (auto f = glm::parse_family(v->get())) m.family = *f;
      else fail(*v, join(prefix, "family"), fmt::format("'{}' is not one of poisson, quasipoisson, negbin", v->get()));
    }
    if (auto* v = get<toml::value<std::string>>(t, "link", prefix, "a string")) {
      if (auto l = glm::parse_link(v->get())) m.link = *l;
      else fail(*v, join(prefix, "link"), fmt::format("'{}' is not one of log, sqrt, identity", v->get()));
    }
    if (auto* v = get<toml::value<bool>>(t, "trend", prefix, "true or false")) m.trend = v->get();
    if (auto* arr = get<toml::array>(t, "covariates", prefix, "an array of column names")) {
      m.covariates.clear();
      for (const toml::node& e : *arr) {
        const auto* s = e.as_string();
        if (!s || s->get().empty()) {
          fail(e, join(prefix, "covariates"), "every entry must be a non-empty column name");
          return;
        }
        if (s->get() == "time" || s->get() == "series" || s->get() == "count" || s->get() == "exposure") {
          fail(e, join(prefix, "covariates"), fmt::format("'{}' is a reserved column, not a covariate", s->get()));
          return;
        }
        m.covariates.push_back(s->get());
      }
    }
    if (auto* arr = get<toml::array>(t, "seasons", prefix, "an array of tables ([[model.seasons]])")) {
      m.seasons.clear();
      for (const toml::node& e : *arr) {
        const toml::table* st = e.as_table();
        const std::string sp = join(prefix, "seasons");
        if (!st) {
          fail(e, sp, "every entry must be a table with period and harmonics");
          return;
        }
        check_keys(*st, sp, {"period", "harmonics"});
        Season season;
        const auto* period = get<toml::value<std::string>>(*st, "period", sp, "a duration string like \"1y\"");
        if (!period) {
          if (!failed()) fail(e, join(sp, "period"), "is required");
          return;
        }
        auto d = parse_duration(period->get());
        if (!d) {
          fail(*period, join(sp, "period"), d.error().message);
          return;
        }
        season.period = *d;
        if (auto* h = get<toml::value<int64_t>>(*st, "harmonics", sp, "an integer")) {
          if (h->get() < 1 || h->get() > 12) fail(*h, join(sp, "harmonics"), "must be between 1 and 12");
          season.harmonics = static_cast<int>(h->get());
        }
        m.seasons.push_back(season);
      }
    }
    if (const toml::node* w = t.get("window")) read_window(*w, join(prefix, "window"), m.window);
    if (auto* v = get<toml::value<int64_t>>(t, "min_history", prefix, "an integer")) {
      if (v->get() < 1) fail(*v, join(prefix, "min_history"), "must be at least 1");
      else m.min_history = static_cast<std::size_t>(v->get());
    }
    if (auto* v = get<toml::value<bool>>(t, "refit_on_doubt", prefix, "true or false")) m.refit_on_doubt = v->get();
    if (auto* v = get<toml::value<int64_t>>(t, "refit_every", prefix, "an integer")) {
      if (v->get() < 1) fail(*v, join(prefix, "refit_every"), "must be at least 1");
      else m.refit_every = static_cast<std::size_t>(v->get());
    }
    if (auto* v = get<toml::value<bool>>(t, "step_between_refits", prefix, "true or false")) {
      // The step's sums are written for the log link (series/window_step.h).
      if (v->get() && m.link != glm::Link::log)
        fail(*v, join(prefix, "step_between_refits"), "needs link = \"log\"");
      else m.step_between_refits = v->get();
    }
  }

  // window = "3y" | 300 | { span = "3y", records = 300 }
  void read_window(const toml::node& node, std::string_view key, Window& w) {
    auto span_from = [&](const toml::node& n) {
      auto d = parse_duration(n.as_string()->get());
      if (!d) fail(n, key, d.error().message);
      else w.span = *d;
    };
    auto records_from = [&](const toml::node& n) {
      int64_t r = n.as_integer()->get();
      if (r < 3) fail(n, key, "a record count must be at least 3");
      else w.records = static_cast<std::size_t>(r);
    };
    if (node.is_string()) {
      span_from(node);
      w.records.reset();
    } else if (node.is_integer()) {
      records_from(node);
      w.span.reset();
    } else if (const toml::table* t = node.as_table()) {
      check_keys(*t, key, {"span", "records"});
      w.span.reset();
      w.records.reset();
      if (const toml::node* s = t->get("span")) {
        if (s->is_string()) span_from(*s);
        else fail(*s, fmt::format("{}.span", key), "must be a duration string like \"2y\"");
      }
      if (const toml::node* r = t->get("records")) {
        if (r->is_integer()) records_from(*r);
        else fail(*r, fmt::format("{}.records", key), "must be an integer");
      }
      if (!w.span && !w.records && !failed()) fail(node, key, "needs span, records or both");
    } else {
      fail(node, key, "must be a duration string, a record count, or { span = ..., records = ... }");
    }
  }

  void read_alert(const toml::table& t, std::string_view prefix, AlertSpec& a) {
    check_keys(t, prefix, {"alpha", "direction", "method", "draws", "seed", "quadrature_nodes", "screen",
                           "episode_close_records", "grid_node_limit"});
    if (const toml::node* n = t.get("alpha")) {
      std::optional<double> v = n->value<double>();
      if (!v || !(*v > 0 && *v < 0.5)) fail(*n, join(prefix, "alpha"), "must be a number between 0 and 0.5");
      else a.alpha = *v;
    }
    if (auto* v = get<toml::value<std::string>>(t, "direction", prefix, "a string")) {
      if (auto d = parse_direction(v->get())) a.direction = *d;
      else fail(*v, join(prefix, "direction"), fmt::format("'{}' is not one of high, low, both", v->get()));
    }
    if (auto* v = get<toml::value<std::string>>(t, "method", prefix, "a string")) {
      if (auto m = bounds::parse_method(v->get())) a.method = *m;
      else fail(*v, join(prefix, "method"), fmt::format("'{}' is not one of quadrature, simulate", v->get()));
    }
    if (auto* v = get<toml::value<int64_t>>(t, "draws", prefix, "an integer")) {
      if (v->get() < 100 || v->get() > 10'000'000) fail(*v, join(prefix, "draws"), "must be between 100 and 10000000");
      else a.draws = static_cast<int>(v->get());
    }
    if (auto* v = get<toml::value<int64_t>>(t, "quadrature_nodes", prefix, "an integer")) {
      if (v->get() < 2 || v->get() > 200) fail(*v, join(prefix, "quadrature_nodes"), "must be between 2 and 200");
      else a.quadrature_nodes = static_cast<int>(v->get());
    }
    if (auto* v = get<toml::value<int64_t>>(t, "grid_node_limit", prefix, "an integer")) {
      if (v->get() != 0 && (v->get() < 64 || v->get() > 16384))
        fail(*v, join(prefix, "grid_node_limit"), "must be 0 or between 64 and 16384");
      else a.grid_node_limit = static_cast<int>(v->get());
    }
    if (auto* v = get<toml::value<int64_t>>(t, "seed", prefix, "an integer")) {
      if (v->get() < 0) fail(*v, join(prefix, "seed"), "must be non-negative");
      else a.seed = static_cast<std::uint64_t>(v->get());
    }
    if (auto* v = get<toml::value<bool>>(t, "screen", prefix, "true or false")) a.screen = v->get();
    if (auto* v = get<toml::value<int64_t>>(t, "episode_close_records", prefix, "an integer")) {
      if (v->get() < 1 || v->get() > 10000) fail(*v, join(prefix, "episode_close_records"), "must be between 1 and 10000");
      else a.episode_close_records = static_cast<std::uint32_t>(v->get());
    }
  }

  void read_detect(const toml::table& t, std::string_view prefix, DetectSpec& d) {
    check_keys(t, prefix, {"shift", "shift_factor", "shift_arl_records", "shift_error", "low_run", "low_run_quantile",
                           "low_run_alpha", "silence", "silence_multiple", "silence_min_gaps", "silence_window"});
    auto number = [&](std::string_view key, double lo, double hi, bool open_lo, bool open_hi, double& out,
                      std::string_view what) {
      const toml::node* n = t.get(key);
      if (!n) return;
      std::optional<double> v = n->value<double>();
      const bool ok = v && (open_lo ? *v > lo : *v >= lo) && (open_hi ? *v < hi : *v <= hi);
      if (!ok) fail(*n, join(prefix, key), what);
      else out = *v;
    };
    if (auto* v = get<toml::value<bool>>(t, "shift", prefix, "true or false")) d.shift = v->get();
    if (auto* v = get<toml::value<bool>>(t, "low_run", prefix, "true or false")) d.low_run = v->get();
    number("shift_factor", 1, 20, true, false, d.shift_factor, "must be a number above 1 and at most 20");
    number("shift_arl_records", 10, 1e6, false, false, d.shift_arl_records, "must be a number between 10 and 1000000");
    if (auto* v = get<toml::value<std::string>>(t, "shift_error", prefix, "a string")) {
      if (v->get() == "fresh") d.shift_error = ShiftError::fresh;
      else if (v->get() == "held") d.shift_error = ShiftError::held;
      else fail(*v, join(prefix, "shift_error"), fmt::format("'{}' is not one of fresh, held", v->get()));
    }
    number("low_run_quantile", 0, 0.5, true, false, d.low_run_quantile, "must be a number in (0, 0.5]");
    number("low_run_alpha", 0, 0.5, true, true, d.low_run_alpha, "must be a number between 0 and 0.5");
    if (auto* v = get<toml::value<bool>>(t, "silence", prefix, "true or false")) d.silence = v->get();
    number("silence_multiple", 1, 1000, true, false, d.silence_multiple, "must be a number above 1 and at most 1000");
    auto count = [&](std::string_view key, std::uint32_t& out) {
      if (auto* v = get<toml::value<int64_t>>(t, key, prefix, "an integer")) {
        if (v->get() < 2 || v->get() > 1000) fail(*v, join(prefix, key), "must be an integer from 2 to 1000");
        else out = static_cast<std::uint32_t>(v->get());
      }
    };
    count("silence_min_gaps", d.silence_min_gaps);
    count("silence_window", d.silence_window);
    if (d.silence_window < d.silence_min_gaps)
      fail(t, join(prefix, "silence_window"),
           fmt::format("({}) must be at least silence_min_gaps ({}): the median needs that many gaps",
                       d.silence_window, d.silence_min_gaps));
  }

  void read_fdr(const toml::table& t, detect::FdrSpec& f) {
    check_keys(t, "fdr", {"rate", "step", "release_delay", "release_idle"});
    f.enabled = true;  // the table's presence turns it on
    if (const toml::node* n = t.get("rate")) {
      std::optional<double> v = n->value<double>();
      if (!v || !(*v > 0 && *v < 0.5)) fail(*n, "fdr.rate", "must be a number between 0 and 0.5");
      else f.rate = *v;
    }
    if (auto* v = get<toml::value<std::string>>(t, "step", "fdr", "a duration string like \"7d\"")) {
      auto d = parse_duration(v->get());
      if (!d) fail(*v, "fdr.step", d.error().message);
      else if (d->count() <= 0) fail(*v, "fdr.step", "must be longer than 0 seconds");
      else f.step = *d;
    }
    // Service only: when `serve` releases the open step (daemon/step_release.h).
    auto wall = [&](std::string_view key, std::int64_t min_seconds, Seconds& out) {
      const std::string name = fmt::format("fdr.{}", key);
      if (auto* v = get<toml::value<std::string>>(t, key, "fdr", "a duration string like \"1d\"")) {
        auto d = parse_duration(v->get());
        if (!d) fail(*v, name, d.error().message);
        else if (d->count() < min_seconds || d->count() > 30 * 86400)
          fail(*v, name, fmt::format("must be from {}s to 30d", min_seconds));
        else out = *d;
      }
    };
    wall("release_delay", 1, f.release_delay);
    wall("release_idle", 1, f.release_idle);
  }

  void read_arrival(const toml::table& t, ArrivalSpec& a) {
    check_keys(t, "arrival", {"late_tolerance", "duplicates", "max_held"});
    if (auto* v = get<toml::value<std::string>>(t, "late_tolerance", "arrival", "a duration string like \"2d\"")) {
      if (v->get() == "0" || v->get() == "0s") {
        a.late_tolerance = Seconds{0};
      } else {
        auto d = parse_duration(v->get());
        if (!d) fail(*v, "arrival.late_tolerance", d.error().message);
        else if (d->count() > 366 * 86400) fail(*v, "arrival.late_tolerance", "must be at most 366d");
        else a.late_tolerance = *d;
      }
    }
    if (auto* v = get<toml::value<std::string>>(t, "duplicates", "arrival", "a string")) {
      if (v->get() == "refuse") a.duplicates = DuplicatePolicy::refuse;
      else if (v->get() == "replace") a.duplicates = DuplicatePolicy::replace;
      else fail(*v, "arrival.duplicates", fmt::format("'{}' is not one of refuse, replace", v->get()));
    }
    if (auto* v = get<toml::value<int64_t>>(t, "max_held", "arrival", "an integer")) {
      if (v->get() < 1 || v->get() > 100000000) fail(*v, "arrival.max_held", "must be from 1 to 100000000");
      else a.max_held = static_cast<std::size_t>(v->get());
    }
    // Replacing needs a record that waits: with no tolerance each record is judged as it arrives.
    if (a.duplicates == DuplicatePolicy::replace && a.late_tolerance.count() == 0)
      fail(*t.get("duplicates"), "arrival.duplicates",
           "\"replace\" needs arrival.late_tolerance above 0 (with none, a record is judged on arrival and "
           "there is nothing left to replace)");
  }

  void read_limits(const toml::table& t, EngineLimits& l) {
    check_keys(t, "limits", {"max_series"});
    if (auto* v = get<toml::value<int64_t>>(t, "max_series", "limits", "an integer")) {
      if (v->get() < 1) fail(*v, "limits.max_series", "must be at least 1");
      else l.max_series = static_cast<std::size_t>(v->get());
    }
  }

 private:
  std::string source_;
  std::string error_;
};

}  // namespace

Result<MonitorConfig> parse_config(std::string_view text, std::string_view source_name) {
  toml::table root;
  try {
    root = toml::parse(text, source_name);
  } catch (const toml::parse_error& e) {
    return Error{fmt::format("{}:{}: {}", source_name, e.source().begin.line, e.description())};
  }
  MonitorConfig config;
  config.source = std::string(source_name);
  Reader r(source_name);
  r.check_keys(root, "", {"model", "alert", "detect", "fdr", "limits", "arrival", "series", "source", "output",
                          "checkpoint", "status", "intake"});

  auto table_at = [&](std::string_view key) -> const toml::table* {
    const toml::node* n = root.get(key);
    if (!n) return nullptr;
    if (!n->is_table()) r.fail(*n, key, "must be a table");
    return n->as_table();
  };
  if (const toml::table* t = table_at("model")) r.read_model(*t, "model", config.settings.defaults.model);
  if (const toml::table* t = table_at("alert")) r.read_alert(*t, "alert", config.settings.defaults.alert);
  if (const toml::table* t = table_at("detect")) r.read_detect(*t, "detect", config.settings.defaults.detect);
  if (const toml::table* t = table_at("fdr")) r.read_fdr(*t, config.fdr);
  if (const toml::table* t = table_at("limits")) r.read_limits(*t, config.limits);
  if (const toml::table* t = table_at("arrival")) r.read_arrival(*t, config.limits.arrival);

  if (const toml::node* n = root.get("series")) {
    const toml::array* arr = n->as_array();
    if (!arr) r.fail(*n, "series", "must be an array of tables ([[series]])");
    for (std::size_t i = 0; arr && i < arr->size() && !r.failed(); ++i) {
      const toml::table* st = (*arr)[i].as_table();
      const std::string prefix = fmt::format("series[{}]", i);
      if (!st) {
        r.fail((*arr)[i], prefix, "must be a table");
        break;
      }
      r.check_keys(*st, prefix, {"match", "model", "alert", "detect"});
      SettingsRule rule{"", config.settings.defaults};
      const toml::node* m = st->get("match");
      if (!m || !m->is_string() || m->as_string()->get().empty()) {
        r.fail(m ? *m : (*arr)[i], prefix + ".match", "is required: a series id glob like \"trap-*\"");
        break;
      }
      rule.match = m->as_string()->get();
      if (const toml::node* mt = st->get("model")) {
        if (mt->is_table()) r.read_model(*mt->as_table(), prefix + ".model", rule.settings.model);
        else r.fail(*mt, prefix + ".model", "must be a table");
      }
      if (const toml::node* at = st->get("alert")) {
        if (at->is_table()) r.read_alert(*at->as_table(), prefix + ".alert", rule.settings.alert);
        else r.fail(*at, prefix + ".alert", "must be a table");
      }
      if (const toml::node* dt = st->get("detect")) {
        if (dt->is_table()) r.read_detect(*dt->as_table(), prefix + ".detect", rule.settings.detect);
        else r.fail(*dt, prefix + ".detect", "must be a table");
      }
      config.settings.rules.push_back(std::move(rule));
    }
  }
  if (r.failed()) return Error{r.error()};
  if (std::string e = read_service_tables(root, source_name, config.service); !e.empty()) return Error{e};
  return config;
}

Result<MonitorConfig> load_config(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Error{fmt::format("{}: cannot open config file", path)};
  std::ostringstream text;
  text << in.rdbuf();
  return parse_config(text.str(), path);
}

Result<MonitorConfig> load_config_or_defaults(const std::string& path) {
  if (path.empty()) return MonitorConfig{};
  return load_config(path);
}

}  // namespace tallyd

#include "report/svg_plot.h"

#include <fmt/format.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <limits>

namespace tallyd::report {
namespace {

using namespace std::chrono;

std::string f1(double v) { return fmt::format("{:.1f}", v); }

std::string number_label(double v) {
  if (v >= 1e6) return fmt::format("{:g}M", v / 1e6);
  if (v >= 1e4) return fmt::format("{:g}k", v / 1e3);
  return fmt::format("{:g}", v);
}

// Maps time and value to pixels inside a plot rectangle.
struct Frame {
  double left, top, width, height;
  double t0, t1;  // epoch seconds
  double ymax;
  double x(TimePoint t) const {
    const double span = t1 > t0 ? t1 - t0 : 1;
    return left + (static_cast<double>(t.time_since_epoch().count()) - t0) / span * width;
  }
  double y(double v) const { return top + height - std::clamp(v / ymax, 0.0, 1.0) * height; }
};

void time_axis(std::string& svg, const Frame& f, TimePoint a, TimePoint b, double axis_y) {
  svg += fmt::format("<line x1='{}' y1='{}' x2='{}' y2='{}' stroke='{}'/>", f1(f.left), f1(axis_y),
                     f1(f.left + f.width), f1(axis_y), kInk);
  for (const TimeTick& tick : time_ticks(a, b, static_cast<int>(f.width / 90))) {
    const double x = f.x(tick.time);
    svg += fmt::format("<line x1='{0}' y1='{1}' x2='{0}' y2='{2}' stroke='{3}'/>"
                       "<text x='{0}' y='{4}' text-anchor='middle'>{5}</text>",
                       f1(x), f1(axis_y), f1(axis_y + 4), kInk, f1(axis_y + 15), escape_xml(tick.label));
  }
}

void value_axis(std::string& svg, const Frame& f, const std::string& label) {
  svg += fmt::format("<line x1='{0}' y1='{1}' x2='{0}' y2='{2}' stroke='{3}'/>", f1(f.left), f1(f.top),
                     f1(f.top + f.height), kInk);
  for (double v : value_ticks(f.ymax, std::max(2, static_cast<int>(f.height / 30)))) {
    const double y = f.y(v);
    svg += fmt::format("<line x1='{0}' y1='{1}' x2='{2}' y2='{1}' stroke='#ddd'/>"
                       "<text x='{3}' y='{4}' text-anchor='end'>{5}</text>",
                       f1(f.left), f1(y), f1(f.left + f.width), f1(f.left - 4), f1(y + 4), number_label(v));
  }
  svg += fmt::format("<text transform='translate(12,{}) rotate(-90)' text-anchor='middle'>{}</text>",
                     f1(f.top + f.height / 2), escape_xml(label));
}

// One drawing column: the points that fall on the same pixel, merged.
struct Column {
  double x = 0;
  double count_min = 0, count_max = 0;
  bool judged = false;
  double lower = 0, upper = 0, expected_sum = 0;
  int judged_n = 0;
};

std::vector<Column> columns_of(const SeriesTrace& t, const Frame& f, bool bin) {
  std::vector<Column> cols;
  for (const TracePoint& p : t.points) {
    const double x = bin ? std::floor(f.x(p.time)) + 0.5 : f.x(p.time);
    const auto c = static_cast<double>(p.count);
    if (cols.empty() || cols.back().x != x) {
      Column col;
      col.x = x;
      col.count_min = col.count_max = c;
      cols.push_back(col);
    }
    Column& col = cols.back();
    col.count_min = std::min(col.count_min, c);
    col.count_max = std::max(col.count_max, c);
    if (p.judged) {
      const auto lo = static_cast<double>(p.lower), hi = static_cast<double>(p.upper);
      col.lower = col.judged ? std::min(col.lower, lo) : lo;
      col.upper = col.judged ? std::max(col.upper, hi) : hi;
      col.judged = true;
      col.expected_sum += p.expected;
      ++col.judged_n;
    }
  }
  return cols;
}

}  // namespace

std::string escape_xml(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (char c : text) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out += c;
    }
  }
  return out;
}

std::vector<double> value_ticks(double top, int max_ticks) {
  std::vector<double> out;
  if (!(top > 0) || !std::isfinite(top)) return {0};
  max_ticks = std::max(max_ticks, 1);
  const double raw = top / max_ticks;
  const double mag = std::pow(10.0, std::floor(std::log10(raw)));
  double step = mag;
  for (double m : {1.0, 2.0, 5.0, 10.0})
    if (m * mag >= raw) { step = m * mag; break; }
  if (step < 1 && top >= 1) step = 1;  // counts: no fractional ticks above 1
  for (int i = 0; i <= max_ticks + 1 && i * step <= top * (1 + 1e-9); ++i) out.push_back(i * step);
  return out;
}

std::vector<TimeTick> time_ticks(TimePoint from, TimePoint to, int max_ticks) {
  std::vector<TimeTick> out;
  max_ticks = std::max(max_ticks, 2);
  if (to <= from) return out;
  const double span_days = static_cast<double>((to - from).count()) / 86400.0;
  // Calendar steps in months when the span is long.
  for (int months : {1, 3, 6, 12, 24, 60}) {
    if (span_days / (30.44 * months) > max_ticks) continue;
    if (span_days < 60) break;
    year_month_day ymd{floor<days>(from)};
    year_month ym{ymd.year(), ymd.month()};
    ym += std::chrono::months{1};
    while (true) {
      const int m0 = static_cast<int>(static_cast<unsigned>(ym.month())) - 1;
      if (m0 % std::min(months, 12) == 0 && (months <= 12 || static_cast<int>(ym.year()) % (months / 12) == 0)) break;
      ym += std::chrono::months{1};
    }
    for (int guard = 0; guard < 1000; ++guard) {
      const TimePoint t{sys_days{ym / 1}};
      if (t > to) break;
      const auto y = static_cast<int>(ym.year());
      const auto m = static_cast<unsigned>(ym.month());
      out.push_back({t, months >= 12 ? fmt::format("{}", y) : fmt::format("{}-{:02}", y, m)});
      ym += std::chrono::months{months};
    }
    return out;
  }
  // Fixed steps in hours or days.
  for (long long hours : {1LL, 3LL, 6LL, 12LL, 24LL, 48LL, 7 * 24LL, 14 * 24LL, 28 * 24LL}) {
    const long long step = hours * 3600;
    if (span_days * 86400.0 / static_cast<double>(step) > max_ticks) continue;
    const long long first = (from.time_since_epoch().count() / step + 1) * step;
    for (long long s = first; s <= to.time_since_epoch().count(); s += step) {
      const TimePoint t{seconds{s}};
      const year_month_day ymd{floor<days>(t)};
      const auto hh = (s % 86400) / 3600;
      const std::string date = fmt::format("{}-{:02}-{:02}", static_cast<int>(ymd.year()),
                                           static_cast<unsigned>(ymd.month()), static_cast<unsigned>(ymd.day()));
      out.push_back({t, hours >= 24 ? date : fmt::format("{} {:02}:00", date.substr(5), hh)});
    }
    return out;
  }
  return out;
}

std::string series_plot_svg(const SeriesTrace& t, const std::vector<tune::Episode>& episodes, int width) {
  const bool strip = t.exposure_varies();
  const double plot_h = 200, strip_h = strip ? 46 : 0;
  const double height = 30 + plot_h + 34 + strip_h + (strip ? 24 : 0);
  std::string svg = fmt::format(
      "<svg xmlns='http://www.w3.org/2000/svg' width='{0}' height='{1}' viewBox='0 0 {0} {1}' "
      "font-family='DejaVu Sans, Verdana, sans-serif' font-size='11' role='img'>"
      "<title>{2}: observed counts, expected count and predictive band</title>"
      "<rect width='100%' height='100%' fill='#ffffff'/>",
      width, f1(height), escape_xml(t.id));
  if (t.points.empty()) return svg + "<text x='10' y='20'>no records</text></svg>";

  const TimePoint a = t.points.front().time, b = t.points.back().time;
  double top = 1;
  std::vector<double> uppers;
  for (const TracePoint& p : t.points) {
    top = std::max(top, static_cast<double>(p.count));
    if (p.judged && p.upper < (std::int64_t{1} << 53)) uppers.push_back(static_cast<double>(p.upper));
  }
  // A wild early band must not squash the picture: scale to the 98th percentile of the upper bounds.
  if (!uppers.empty()) {
    std::nth_element(uppers.begin(), uppers.begin() + static_cast<long>(uppers.size() * 98 / 100), uppers.end());
    top = std::max(top, uppers[uppers.size() * 98 / 100]);
  }
  const Frame f{58, 24, static_cast<double>(width) - 70, plot_h, static_cast<double>(a.time_since_epoch().count()),
                static_cast<double>(b.time_since_epoch().count()), value_ticks(top * 1.05, 6).back() >= top * 1.05
                                                                        ? value_ticks(top * 1.05, 6).back()
                                                                        : top * 1.05};
  svg += fmt::format("<text x='{}' y='14' font-weight='bold'>counts per record</text>", f1(f.left));

  for (const tune::Episode& e : episodes) {
    if (e.series != t.id || e.end < a || e.start > b) continue;
    const double x0 = f.x(std::max(e.start, a)), x1 = f.x(std::min(e.end, b));
    svg += fmt::format("<rect x='{}' y='{}' width='{}' height='{}' fill='{}' fill-opacity='0.22'>"
                       "<title>known episode {} to {}</title></rect>",
                       f1(x0), f1(f.top), f1(std::max(x1 - x0, 2.0)), f1(f.height), kEpisode,
                       format_time(e.start), format_time(e.end));
  }
  value_axis(svg, f, "count");

  const bool bin = t.points.size() > static_cast<std::size_t>(f.width * 2);
  const std::vector<Column> cols = columns_of(t, f, bin);
  // Band and expected line, in runs of judged columns.
  std::string band, line;
  for (std::size_t i = 0; i < cols.size();) {
    if (!cols[i].judged) { ++i; continue; }
    std::size_t j = i;
    while (j < cols.size() && cols[j].judged) ++j;
    std::string up, down;
    for (std::size_t k = i; k < j; ++k) {
      up += fmt::format("{}{},{}", k == i ? "M" : "L", f1(cols[k].x), f1(f.y(cols[k].upper)));
      line += fmt::format("{}{},{}", k == i ? "M" : "L", f1(cols[k].x), f1(f.y(cols[k].expected_sum / cols[k].judged_n)));
    }
    for (std::size_t k = j; k-- > i;) down += fmt::format("L{},{}", f1(cols[k].x), f1(f.y(cols[k].lower)));
    band += up + down + "Z";
    i = j;
  }
  if (!band.empty()) svg += fmt::format("<path d='{}' fill='{}' fill-opacity='0.35' stroke='none'/>", band, kBand);
  if (!line.empty()) svg += fmt::format("<path d='{}' fill='none' stroke='{}' stroke-width='1.5'/>", line, kExpected);
  std::string obs;
  for (std::size_t k = 0; k < cols.size(); ++k) {
    if (bin) {
      obs += fmt::format("M{},{}V{}", f1(cols[k].x), f1(f.y(cols[k].count_min) + 0.5), f1(f.y(cols[k].count_max) - 0.5));
    } else {
      obs += fmt::format("{}{},{}", k == 0 ? "M" : "L", f1(cols[k].x), f1(f.y(cols[k].count_max)));
    }
  }
  svg += fmt::format("<path d='{}' fill='none' stroke='{}' stroke-width='1'/>", obs, kInk);
  for (const TracePoint& p : t.points) {
    if (p.flag == 0) continue;
    const double x = f.x(p.time), y = f.y(static_cast<double>(p.count));
    const bool high = p.flag > 0;
    // Upward triangle above a high count, downward below a low one.
    svg += fmt::format("<path d='M{},{}l5,{}h-10z' fill='{}' stroke='#000' stroke-width='0.5'>", f1(x),
                       f1(high ? y - 9 : y + 9), high ? 8 : -8, high ? kHigh : kLow);
    svg += fmt::format("<title>{} {} alert: count {}, expected {:.1f}, bounds {} to {}</title></path>",
                       format_time(p.time), high ? "high" : "low", p.count, p.expected, p.lower, p.upper);
  }
  time_axis(svg, f, a, b, f.top + f.height);
  svg += fmt::format("<text x='{}' y='{}' text-anchor='end'>time (UTC)</text>", f1(f.left + f.width),
                     f1(f.top + f.height + 28));

  if (strip) {
    double emax = 0;
    for (const TracePoint& p : t.points) emax = std::max(emax, p.exposure);
    const Frame g{f.left, f.top + f.height + 44, f.width, strip_h, f.t0, f.t1, emax > 0 ? emax * 1.05 : 1};
    std::string ex;
    for (std::size_t k = 0; k < t.points.size(); ++k)
      ex += fmt::format("{}{},{}", k == 0 ? "M" : "L", f1(g.x(t.points[k].time)), f1(g.y(t.points[k].exposure)));
    svg += fmt::format("<path d='{}' fill='none' stroke='{}' stroke-width='1'/>", ex, kExposure);
    svg += fmt::format("<line x1='{0}' y1='{1}' x2='{0}' y2='{2}' stroke='{3}'/>"
                       "<text x='{4}' y='{5}' text-anchor='end'>{6}</text><text x='{4}' y='{2}' text-anchor='end'>0</text>"
                       "<text x='{7}' y='{8}'>exposure per record (feed units), 0 to {6}</text>",
                       f1(g.left), f1(g.top), f1(g.top + g.height), kInk, f1(g.left - 4), f1(g.top + 8),
                       number_label(emax), f1(g.left + 4), f1(g.top + g.height + 14));
  }
  return svg + "</svg>";
}

std::string sparkline_svg(const SeriesTrace& t, int width, int height) {
  std::string svg = fmt::format("<svg xmlns='http://www.w3.org/2000/svg' width='{0}' height='{1}' viewBox='0 0 {0} {1}'>",
                                width, height);
  if (t.points.empty()) return svg + "</svg>";
  double top = 1;
  for (const TracePoint& p : t.points) top = std::max(top, static_cast<double>(p.count));
  const Frame f{1, 3, static_cast<double>(width) - 2, static_cast<double>(height) - 4,
                static_cast<double>(t.points.front().time.time_since_epoch().count()),
                static_cast<double>(t.points.back().time.time_since_epoch().count()), top};
  // One max per pixel column keeps a long series to ~width points.
  std::string d;
  double last_x = -1, col_max = 0;
  bool first = true;
  const auto flush = [&] {
    if (last_x < 0) return;
    d += fmt::format("{}{},{}", first ? "M" : "L", f1(last_x), f1(f.y(col_max)));
    first = false;
  };
  for (const TracePoint& p : t.points) {
    const double x = std::floor(f.x(p.time));
    if (x != last_x) {
      flush();
      last_x = x;
      col_max = 0;
    }
    col_max = std::max(col_max, static_cast<double>(p.count));
  }
  flush();
  svg += fmt::format("<path d='{}' fill='none' stroke='{}' stroke-width='1'/>", d, kInk);
  for (const TracePoint& p : t.points)
    if (p.flag != 0)
      svg += fmt::format("<rect x='{}' y='0' width='2' height='{}' fill='{}'/>", f1(f.x(p.time) - 1), height,
                         p.flag > 0 ? kHigh : kLow);
  return svg + "</svg>";
}

std::string tradeoff_svg(const std::vector<tune::TuneRow>& rows, std::optional<std::size_t> chosen,
                         double max_false_per_year, int width, int height) {
  std::string svg = fmt::format(
      "<svg xmlns='http://www.w3.org/2000/svg' width='{0}' height='{1}' viewBox='0 0 {0} {1}' "
      "font-family='DejaVu Sans, Verdana, sans-serif' font-size='11' role='img'>"
      "<title>false alerts per series-year against episodes detected, across alpha</title>"
      "<rect width='100%' height='100%' fill='#ffffff'/>",
      width, height);
  // x: log10 of false alerts per series-year, zero drawn at the left edge.
  double lo = std::log10(std::max(max_false_per_year, 1e-3)), hi = lo;
  for (const tune::TuneRow& r : rows) {
    const double v = r.score.false_per_series_year;
    if (v > 0 && std::isfinite(v)) { lo = std::min(lo, std::log10(v)); hi = std::max(hi, std::log10(v)); }
  }
  lo = std::floor(lo) - 0.3;  // room for the "0" column
  hi = std::ceil(hi);
  const double left = 60, top = 20, w = width - 80, h = height - 70;
  const auto px = [&](double v) { return left + ((v > 0 ? std::log10(v) : lo) - lo) / (hi - lo) * w; };
  const auto py = [&](double d) { return top + h - (std::isnan(d) ? 0 : d) * h; };
  svg += fmt::format("<line x1='{0}' y1='{1}' x2='{0}' y2='{2}' stroke='#000'/><line x1='{0}' y1='{2}' x2='{3}' y2='{2}' stroke='#000'/>",
                     left, top, top + h, left + w);
  for (int i = 0; i <= 4; ++i)
    svg += fmt::format("<line x1='{0}' y1='{1}' x2='{2}' y2='{1}' stroke='#ddd'/><text x='{3}' y='{4}' text-anchor='end'>{5}%</text>",
                       left, f1(py(i / 4.0)), left + w, left - 4, f1(py(i / 4.0) + 4), i * 25);
  for (int e = static_cast<int>(std::ceil(lo)); e <= static_cast<int>(hi); ++e)
    svg += fmt::format("<line x1='{0}' y1='{1}' x2='{0}' y2='{2}' stroke='#000'/><text x='{0}' y='{3}' text-anchor='middle'>{4:g}</text>",
                       f1(px(std::pow(10.0, e))), top + h, top + h + 4, top + h + 16, std::pow(10.0, e));
  svg += fmt::format("<text x='{}' y='{}' text-anchor='middle'>0</text>", f1(px(0)), top + h + 16);
  svg += fmt::format("<text x='{}' y='{}' text-anchor='middle'>false alerts per series-year (log scale; outside known episodes)</text>",
                     f1(left + w / 2), height - 12);
  svg += fmt::format("<text transform='translate(14,{}) rotate(-90)' text-anchor='middle'>known episodes with an alert</text>",
                     f1(top + h / 2));
  svg += fmt::format("<line x1='{0}' y1='{1}' x2='{0}' y2='{2}' stroke='{3}' stroke-dasharray='5,3'/>"
                     "<text x='{4}' y='{5}'>budget {6:g}</text>",
                     f1(px(max_false_per_year)), top, top + h, kHigh, f1(px(max_false_per_year) + 4), top + 10, max_false_per_year);
  // One polyline per model setting, points in alpha order.
  const char* colours[] = {kExpected, kEpisode, kLow, kExposure, kBand, "#F0E442", kHigh};
  std::vector<std::string> labels;
  for (const tune::TuneRow& r : rows)
    if (std::find(labels.begin(), labels.end(), r.variant.label()) == labels.end()) labels.push_back(r.variant.label());
  for (std::size_t li = 0; li < labels.size(); ++li) {
    std::vector<const tune::TuneRow*> pts;
    for (const tune::TuneRow& r : rows)
      if (r.variant.label() == labels[li]) pts.push_back(&r);
    std::sort(pts.begin(), pts.end(), [](auto* x, auto* y) { return x->score.alpha < y->score.alpha; });
    std::string d;
    for (std::size_t k = 0; k < pts.size(); ++k)
      d += fmt::format("{}{},{}", k == 0 ? "M" : "L", f1(px(pts[k]->score.false_per_series_year)), f1(py(pts[k]->score.detection)));
    const char* c = colours[li % 7];
    svg += fmt::format("<path d='{}' fill='none' stroke='{}' stroke-width='1.5'/>", d, c);
    for (const tune::TuneRow* p : pts)
      svg += fmt::format("<circle cx='{}' cy='{}' r='3' fill='{}'><title>{}, alpha {:g}: {:.2f} false/series-year, {}/{} episodes</title></circle>",
                         f1(px(p->score.false_per_series_year)), f1(py(p->score.detection)), c,
                         escape_xml(labels[li]), p->score.alpha, p->score.false_per_series_year, p->score.episodes_hit,
                         p->score.episodes_judged);
    svg += fmt::format("<rect x='{}' y='{}' width='10' height='3' fill='{}'/><text x='{}' y='{}'>{}</text>", left + 10,
                       f1(top + 8 + li * 14), c, left + 24, f1(top + 12 + li * 14), escape_xml(labels[li]));
  }
  if (chosen && *chosen < rows.size()) {
    const tune::Score& s = rows[*chosen].score;
    svg += fmt::format("<circle cx='{}' cy='{}' r='8' fill='none' stroke='#000' stroke-width='2'/>"
                       "<text x='{}' y='{}' text-anchor='end' font-weight='bold'>chosen: alpha {:g}</text>",
                       f1(px(s.false_per_series_year)), f1(py(s.detection)), f1(px(s.false_per_series_year) - 10),
                       f1(py(s.detection) + 20), s.alpha);
  }
  return svg + "</svg>";
}

}  // namespace tallyd::report

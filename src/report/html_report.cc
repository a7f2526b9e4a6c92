#include "report/html_report.h"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

#include "report/svg_plot.h"

namespace tallyd::report {

const char* const kCaution =
    "Alerts are statistical signals that a count is unusual for its series, not findings: confirm them in the "
    "field before acting. Local regulations and licensed practitioners decide on any treatment, quarantine or "
    "public-health response.";

namespace {

// Plain print-like page: serif-free body text, thin rules, no cards or tiles.
const char* const kStyle = R"(
body{font-family:"DejaVu Sans",Verdana,sans-serif;font-size:14px;color:#111;background:#fff;margin:1.5em auto;max-width:820px;padding:0 1em;line-height:1.4}
h1{font-size:1.5em;margin:0 0 .2em}h2{font-size:1.15em;border-bottom:1px solid #999;margin-top:2em}
h3{font-size:1em;margin:.2em 0}.notes{color:#444;margin:0;padding:0;list-style:none}
.caution{border-left:4px solid #E69F00;padding:.4em .8em;background:#fdf6e8}
table{border-collapse:collapse;font-size:13px}td,th{padding:2px 8px;text-align:right;border-bottom:1px solid #eee}
td:first-child,th:first-child{text-align:left}td.spark{padding:0 4px}
section.panel{margin:1.2em 0 2em;min-height:300px}section.panel .plot svg{max-width:100%;height:auto}
.key span{margin-right:1.2em;white-space:nowrap}.key i{display:inline-block;width:14px;height:10px;margin-right:4px;vertical-align:middle}
.coef{margin-top:.4em}.small{font-size:12px;color:#444}a{color:#0072B2}pre{background:#f4f4f4;padding:.6em;overflow-x:auto}
)";

const char* const kScript = R"(
(function(){
  var panels=document.querySelectorAll('section.panel');
  function draw(p){
    if(p.getAttribute('data-drawn'))return;
    var t=p.querySelector('script[type="text/x-panel"]');
    p.querySelector('.plot').innerHTML=t.textContent;
    p.setAttribute('data-drawn','1');
  }
  var io=null;
  if('IntersectionObserver' in window){
    io=new IntersectionObserver(function(es){es.forEach(function(e){if(e.isIntersecting){draw(e.target);io.unobserve(e.target);}});},{rootMargin:'600px'});
    panels.forEach(function(p){io.observe(p);});
  }
  var i=0;
  function batch(){
    var n=0;
    while(i<panels.length&&n<25){draw(panels[i++]);n++;}
    if(i<panels.length){setTimeout(batch,20);}else{if(io)io.disconnect();document.body.setAttribute('data-panels-drawn',String(panels.length));}
  }
  setTimeout(batch,100);
})();
)";

std::string fmt_num(double v) {
  if (std::isnan(v)) return "-";
  if (std::isinf(v)) return v > 0 ? "&#8734;" : "-&#8734;";
  return fmt::format("{:.4g}", v);
}

std::string anchor(std::size_t i) { return fmt::format("s{}", i); }

void tune_section(std::string& html, const ReportInput& in) {
  const auto& rows = *in.tune_rows;
  html += "<h2>Tuning: false alerts against episodes detected</h2>";
  html += "<p class='small'>Each point is one alpha for one model setting, scored on the replayed history. Moving right "
          "(larger alpha) catches more known episodes at the cost of more alerts outside them. The dashed line is "
          "the false-alert budget; the ringed point is the chosen setting.</p>";
  html += tradeoff_svg(rows, in.chosen, in.max_false_per_year);
  if (in.chosen) {
    html += "<p><b>Chosen:</b> " + escape_xml(rows[*in.chosen].variant.label()) +
            fmt::format(", alpha {:g}. The panels below show a replay with this setting.</p>", rows[*in.chosen].score.alpha);
    html += "<pre>" + escape_xml(tune::config_snippet(rows[*in.chosen], in.max_false_per_year)) + "</pre>";
  } else {
    html += fmt::format("<p><b>No setting stays within {:g} false alerts per series-year</b> on this history. The "
                        "panels below show the configured setting.</p>", in.max_false_per_year);
  }
  html += "<table><tr><th>rank</th><th>model setting</th><th>alpha</th><th>alerts</th><th>false / series-year</th>"
          "<th>episodes hit</th><th>median delay (days)</th></tr>";
  for (std::size_t i = 0; i < rows.size() && i < 12; ++i) {
    const tune::Score& s = rows[i].score;
    html += fmt::format("<tr><td>{}</td><td>{}</td><td>{:g}</td><td>{}</td><td>{}</td><td>{}/{}</td><td>{}</td></tr>", i + 1,
                        escape_xml(rows[i].variant.label()), s.alpha, s.alerts, fmt_num(s.false_per_series_year),
                        s.episodes_hit, s.episodes_judged, fmt_num(s.delay_median_days));
  }
  html += "</table>";
}

}  // namespace

std::string render_report_html(const ReportInput& in) {
  std::vector<std::size_t> order(in.series.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    const auto& x = in.series[a];
    const auto& y = in.series[b];
    return x.alerts_high + x.alerts_low > y.alerts_high + y.alerts_low;
  });

  std::string html = "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
                     "<meta name='viewport' content='width=device-width, initial-scale=1'>"
                     "<title>" + escape_xml(in.title) + "</title><style>" + kStyle + "</style></head><body>";
  html += "<h1>" + escape_xml(in.title) + "</h1><ul class='notes'>";
  for (const std::string& n : in.notes) html += "<li>" + escape_xml(n) + "</li>";
  html += "</ul><p class='caution'>" + std::string(kCaution) + "</p>";
  if (in.tune_rows) tune_section(html, in);

  html += fmt::format("<h2>All series, most alerts first ({})</h2>", in.series.size());
  html += "<table class='overview'><tr><th>series</th><th>records</th><th>judged</th><th>high</th><th>low</th>"
          "<th>counts over the whole replay (marks: alerts)</th></tr>";
  for (std::size_t rank = 0; rank < order.size(); ++rank) {
    const SeriesTrace& t = in.series[order[rank]];
    const auto judged = std::count_if(t.points.begin(), t.points.end(), [](const TracePoint& p) { return p.judged; });
    html += fmt::format("<tr><td><a href='#{}'>{}</a></td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td class='spark'>{}</td></tr>",
                        anchor(rank), escape_xml(t.id), t.points.size(), judged, t.alerts_high, t.alerts_low,
                        sparkline_svg(t));
  }
  html += "</table>";

  html += "<h2>Series one by one</h2><p class='key small'>"
          "<span><i style='background:#000;height:2px'></i>observed count</span>"
          "<span><i style='background:#0072B2;height:2px'></i>expected count</span>"
          "<span><i style='background:#56B4E9;opacity:.5'></i>predictive band (alerting bounds)</span>"
          "<span><i style='background:#D55E00'></i>&#9650; high alert</span>"
          "<span><i style='background:#009E73'></i>&#9660; low alert</span>"
          "<span><i style='background:#E69F00;opacity:.4'></i>known episode</span></p>"
          "<p class='small'>Each record is judged against the model fitted on earlier records only; the band and "
          "expected line start once a series has enough history. Colours: Okabe-Ito palette.</p>";
  for (std::size_t rank = 0; rank < order.size(); ++rank) {
    const SeriesTrace& t = in.series[order[rank]];
    html += fmt::format("<section class='panel' id='{}'><h3>{}</h3><p class='small'>{} records; {} high and {} low "
                        "alerts; family {}, alpha {:g}</p><div class='plot'></div><script type='text/x-panel'>",
                        anchor(rank), escape_xml(t.id), t.points.size(), t.alerts_high, t.alerts_low,
                        escape_xml(t.family.empty() ? "-" : t.family), t.alpha);
    // Raw text until drawn: the browser does not parse it at load. It cannot
    // contain "</script": every text from the data went through escape_xml.
    html += series_plot_svg(t, in.episodes);
    html += "<table class='coef'><tr><th>coefficient (link scale)</th><th>estimate</th><th>std. error</th></tr>";
    for (const CoefficientRow& c : t.coefficients)
      html += fmt::format("<tr><td>{}</td><td>{}</td><td>{}</td></tr>", escape_xml(c.name), fmt_num(c.estimate),
                          fmt_num(c.std_error));
    html += fmt::format("</table><p class='small'>fit at the end of the replay: {}; dispersion {}; negbin theta {}</p>",
                        escape_xml(t.fit_status.empty() ? "-" : t.fit_status), fmt_num(t.dispersion),
                        t.family == "negbin" ? fmt_num(t.theta) : "-");
    html += "</script></section>";
  }
  html += std::string("<script>") + kScript + "</script></body></html>\n";
  return html;
}

}  // namespace tallyd::report

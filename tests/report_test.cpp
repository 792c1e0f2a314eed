// report.html (pare/report.h): a self-contained page (no script, nothing fetched, printable),
// every name escaped, the funnel equal to the steps' counts, the top-30 chart equal to
// ranking.tsv, histogram counts that add up, and a bounded size at 100,000 features and 10,000
// samples. The strict HTML parse and the rendering in Chromium are in
// tests/reference/report_reference.py.
#include "pare/report.h"

#include <cmath>    // std::isnan
#include <cstdint>  // std::int64_t
#include <limits>   // std::numeric_limits
#include <random>   // std::mt19937_64
#include <regex>    // std::regex, std::sregex_iterator
#include <sstream>  // std::istringstream
#include <string>   // std::string
#include <vector>   // std::vector

#include <catch2/catch.hpp>

#include "pare/reduce.h"

namespace {

// prefix + number, appended (GCC 12 warns falsely about `"literal" + std::to_string(...)`).
std::string numbered(const char* prefix, std::int64_t v) {
  std::string s(prefix);
  s += std::to_string(v);
  return s;
}

constexpr float kGap = std::numeric_limits<float>::quiet_NaN();

std::size_t occurrences(const std::string& text, const std::string& what) {
  std::size_t count = 0;
  for (std::size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + 1))
    ++count;
  return count;
}

// 60 samples x 80 features with something for every step: 6 mostly-missing features, 4 constant
// ones, 20 informative ones (shifted in class "dry") and a near-copy of each of the first 8.
pare::FeatureTable small_table(std::vector<std::string> names = {}) {
  const Eigen::Index n = 60, p = 80;
  std::mt19937_64 rng(42);
  std::normal_distribution<double> normal(0.0, 1.0);
  pare::FeatureTable t;
  t.values.resize(n, p);
  for (Eigen::Index i = 0; i < n; ++i) {
    t.sample_ids.push_back(numbered("s", i + 1));
    t.labels.push_back(i % 3 == 0 ? "dry" : "wet");
  }
  for (Eigen::Index j = 0; j < p; ++j) {
    for (Eigen::Index i = 0; i < n; ++i) {
      double v = normal(rng);
      if (j < 20 && i % 3 == 0) v += 1.0 + 0.1 * static_cast<double>(j);
      if (j >= 20 && j < 28) v = t.values(i, j - 20) + 0.1 * normal(rng);
      if (j >= 28 && j < 32) v = 3.0;
      if (j >= 32 && j < 38 && i % 2 == 0) v = std::numeric_limits<double>::quiet_NaN();
      t.values(i, j) = static_cast<float>(v);
    }
    if (names.size() < static_cast<std::size_t>(p)) names.push_back(numbered("g", j));
  }
  t.feature_names = names;
  t.label_name = "group";
  t.source = "small.csv";
  return t;
}

struct Run {
  pare::FeatureTable table;
  pare::Reduction reduction;
  pare::ReduceOptions options;
  pare::ReportData report;
  std::string html;
};

Run reduce_and_report(std::vector<std::string> names = {}) {
  Run r;
  r.table = small_table(std::move(names));
  const pare::FeatureTable input = r.table;
  pare::ScreenOptions so;
  const pare::SampleScreen screen = pare::screen_samples(input.values, so);
  r.options.keep = 30;
  r.reduction = pare::reduce(r.table, r.options);
  r.report.command = "reduce";
  r.report.title = "pare reduce: small.csv";
  r.report.samples = 60;
  r.report.features = 80;
  r.report.record.version = "test";
  r.report.record.command_line = {"pare", "reduce", "small.csv", "--keep", "30"};
  pare::add_reduction(r.report, r.table, r.reduction, r.options, true);
  pare::add_screen(r.report, screen, input.sample_ids, input.labels, input.label_name, {});
  r.html = pare::report_html(r.report);
  return r;
}

}  // namespace

TEST_CASE("report: one self-contained page, no script, nothing fetched, printable", "[report]") {
  const Run r = reduce_and_report();
  const std::string& h = r.html;
  REQUIRE(h.rfind("<!DOCTYPE html>\n<html lang=\"en\">", 0) == 0);
  REQUIRE(h.find("<meta charset=\"utf-8\">") != std::string::npos);
  REQUIRE(h.size() > 10000);
  REQUIRE(h.substr(h.size() - 8) == "</html>\n");
  for (const char* absent :
       {"<script", "src=", "href=", "url(", "@import", "@font-face", "<link", "<iframe", "<img"}) {
    INFO(absent);
    REQUIRE(h.find(absent) == std::string::npos);
  }
  // The only address is the SVG namespace name, which is never fetched.
  REQUIRE(occurrences(h, "http") == occurrences(h, "xmlns=\"http://www.w3.org/2000/svg\""));
  REQUIRE(h.find("@media print") != std::string::npos);
  // Every section a newcomer needs.
  for (const char* id : {"glance", "funnel", "distributions", "ranking", "redundancy", "components",
                         "samples", "record"}) {
    INFO(id);
    REQUIRE(h.find(std::string("<section id=\"") + id + "\"") != std::string::npos);
  }
  // Each drawn sample has its id on hover.
  for (const auto& id : r.table.sample_ids)
    REQUIRE(h.find("<title>" + id + " \xC2\xB7 ") != std::string::npos);
  // Same input, same page, once the wall times (which differ from run to run) are set equal.
  Run again = reduce_and_report();
  pare::ReportData a = r.report, b = again.report;
  for (auto* d : {&a, &b})
    for (auto& st : d->steps) st.seconds = 0;
  REQUIRE(pare::report_html(a) == pare::report_html(b));
}

TEST_CASE("report: the funnel shows the steps' counts; the top 30 equal ranking.tsv", "[report]") {
  const Run r = reduce_and_report();
  for (const auto& st : r.reduction.steps) {
    INFO(st.name);
    REQUIRE(r.html.find("data-step=\"" + st.name + "\" data-in=\"" + std::to_string(st.in) +
                        "\" data-out=\"" + std::to_string(st.out) + "\"") != std::string::npos);
  }
  // The steps removed something, so the test would notice a wrong count.
  REQUIRE(r.reduction.steps[0].out < r.reduction.steps[0].in);  // missing
  const std::string tsv = pare::reduction_ranking_tsv(r.table, r.reduction);
  std::istringstream in(tsv);
  std::string line;
  std::getline(in, line);
  REQUIRE(line.rfind("rank\tfeature\tmi\t", 0) == 0);
  const std::regex bar(
      R"re(<g class="feature" data-rank="(\d+)" data-name="([^"]*)" data-value="([^"]*)" data-q="([^"]*)">)re");
  std::vector<std::smatch> bars;
  for (auto it = std::sregex_iterator(r.html.begin(), r.html.end(), bar);
       it != std::sregex_iterator(); ++it)
    bars.push_back(*it);
  REQUIRE(bars.size() == 30);
  for (std::size_t k = 0; k < bars.size(); ++k) {
    REQUIRE(std::getline(in, line));
    std::vector<std::string> f;
    std::istringstream cells(line);
    for (std::string cell; std::getline(cells, cell, '\t');) f.push_back(cell);
    INFO(line);
    REQUIRE(bars[k][1] == f[0]);
    REQUIRE(bars[k][2] == f[1]);
    REQUIRE(bars[k][3] == f[2]);  // mi
    REQUIRE(bars[k][4] == f[5]);  // chi2_q: the q-value of the test mi ranks with
  }
}

TEST_CASE("report: names are escaped and cleaned wherever they appear", "[report]") {
  std::vector<std::string> names;
  for (int j = 0; j < 80; ++j) names.push_back(numbered("g", j));
  names[0] = "<b>&\"'x";         // informative: in the top 30 and a redundancy group
  names[1] = "bad\xFF\x01name";  // an invalid byte and a control character
  names[2] = "</title><script>alert(1)</script>";
  const Run r = reduce_and_report(names);
  REQUIRE(r.html.find("<b>&") == std::string::npos);
  REQUIRE(r.html.find("<script") == std::string::npos);
  REQUIRE(r.html.find("&lt;b&gt;&amp;&quot;&#39;x") != std::string::npos);
  REQUIRE(r.html.find("bad\xEF\xBF\xBD\xEF\xBF\xBDname") != std::string::npos);
  REQUIRE(r.html.find('\x01') == std::string::npos);
  REQUIRE(r.html.find('\xFF') == std::string::npos);
}

TEST_CASE("report: histogram bars add up to the values, split at the cut", "[report]") {
  pare::ReportData d;
  d.command = "reduce";
  d.title = "t";
  pare::ReportHistogram h;
  h.id = "missing";
  h.title = "missing";
  h.axis = "missing rate";
  h.lo = 0;
  h.hi = 1;
  h.bin_width = 0.02;
  h.cut_keeps_equal_above = false;  // dropped when above the cut
  for (int i = 0; i < 100; ++i) {
    h.values.push_back(i / 100.0);
    h.dropped.push_back(i / 100.0 > 0.2);
  }
  h.values.push_back(std::numeric_limits<double>::quiet_NaN());
  h.dropped.push_back(0);
  h.cuts.push_back({0.2, "max missing 0.2"});
  d.histograms.push_back(h);
  const std::string html = pare::report_html(d);
  const std::regex title(R"re(<title>([^<:]*): ([0-9,]+) features(, ([a-z ]+))?</title>)re");
  std::int64_t kept = 0, dropped = 0;
  for (auto it = std::sregex_iterator(html.begin(), html.end(), title);
       it != std::sregex_iterator(); ++it) {
    std::string digits = (*it)[2];
    std::erase(digits, ',');
    ((*it)[4] == "dropped by this filter" ? dropped : kept) += std::stoll(digits);
    // The bin holding 0.2 itself ends at the cut and is on the kept side.
    if ((*it)[1] == "(0.18, 0.2]") REQUIRE((*it)[4] == "passed");
  }
  REQUIRE(kept == 21);     // 0.00 .. 0.20
  REQUIRE(dropped == 79);  // 0.21 .. 0.99
  REQUIRE(html.find("1 without a value not shown.") != std::string::npos);
  REQUIRE(html.find("max missing 0.2</text>") != std::string::npos);

  // A log axis puts zeros (constant features) in a bar of their own.
  pare::ReportHistogram v;
  v.id = "variance";
  v.title = "variance";
  v.axis = "variance";
  v.log_x = true;
  v.values = {0, 0, 0, 1e-3, 0.5, 2, 40};
  d.histograms = {v};
  const std::string log_html = pare::report_html(d);
  REQUIRE(log_html.find("<title>0: 3 features</title>") != std::string::npos);
}

TEST_CASE("report: 100,000 features and 10,000 samples stay legible and small", "[report]") {
  std::mt19937_64 rng(7);
  std::normal_distribution<double> normal(0.0, 1.0);
  pare::ReportData d;
  d.command = "reduce";
  d.title = "wide";
  d.samples = 10000;
  d.features = 100000;
  d.steps = {
      {"read", 100000, 100000, 1}, {"missing", 100000, 99000, 0.1}, {"top", 99000, 200, 0.1}};
  pare::ReportHistogram h;
  h.id = "variance";
  h.title = "variance";
  h.axis = "variance";
  h.log_x = true;
  for (int j = 0; j < 100000; ++j) h.values.push_back(std::exp(2 * normal(rng)));
  d.histograms.push_back(h);
  d.components.source = "kept";
  d.components.ratio = {0.3, 0.2, 0.1};
  d.components.cumulative = {0.3, 0.5, 0.6};
  d.components.scores.resize(3);
  pare::ReportSamples& s = d.sample_info;
  s.screened = true;
  s.threshold = 5;
  s.rule = "rule";
  for (int i = 0; i < 10000; ++i) {
    s.ids.push_back(numbered("sample_", i));
    s.labels.push_back(i % 4 == 0 ? "a" : "b");
    s.distance.push_back(std::abs(normal(rng)) * 2);
    s.flagged.push_back(i == 1 || i == 4001);  // neither on the stride of 4
    s.missing_rate.push_back(0.01);
    for (auto& c : d.components.scores) c.push_back(normal(rng));
  }
  const std::string html = pare::report_html(d);
  INFO(html.size() << " bytes");
  REQUIRE(html.size() < 2'000'000);
  // Two scatter plots of 2,500 + 2 dots, each with its tooltip, and the rings of the flagged.
  REQUIRE(occurrences(html, "2,502 of 10,000 samples drawn (one in 4, and every flagged one)") ==
          2);
  REQUIRE(occurrences(html, "<title>sample_1 \xC2\xB7 b \xC2\xB7 distance ") ==
          4);  // dot and ring, twice
  REQUIRE(occurrences(html, "<title>sample_4 \xC2\xB7 ") == 2);
  REQUIRE(occurrences(html, "<title>sample_5 \xC2\xB7 ") == 0);
}

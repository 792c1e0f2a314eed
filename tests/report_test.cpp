// report.html (pare/report.h): a self-contained page (no script, nothing fetched, printable),
// every name escaped, the funnel equal to the steps' counts, the top-30 chart equal to
// ranking.tsv, histogram counts that add up, and a bounded size at 100,000 features and 10,000
// samples; the score curve equal to selection-log.tsv's scores in ranking order with the --fdr and
// --keep cuts where the log puts them, the p-value histogram's counts, the strip plots' values
// and class quartiles, and the sample plots coloured by a sheet column (--mark-by); against a
// continuous target, the ranking in the target's words (signed r, |r| bars, its test's p-values),
// scatter plots of the top features against the target and the sample plots on a ramp. The strict
// HTML parse, numpy's histogram and quantiles on a real run, and the rendering in Chromium are in
// tests/reference/report_reference.py.
#include "pare/report.h"

#include <algorithm>  // std::sort, std::stable_sort
#include <charconv>   // std::to_chars
#include <cmath>      // std::isnan
#include <cstdint>    // std::int64_t
#include <limits>     // std::numeric_limits
#include <map>        // std::map
#include <random>     // std::mt19937_64
#include <regex>      // std::regex, std::sregex_iterator
#include <set>        // std::set
#include <sstream>    // std::istringstream
#include <string>     // std::string
#include <tuple>      // std::tuple
#include <vector>     // std::vector

#include <catch2/catch.hpp>

#include "pare/projection.h"
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

Run reduce_and_report(std::vector<std::string> names = {}, pare::ReduceOptions options = {},
                      bool labelled = true) {
  Run r;
  r.table = small_table(std::move(names));
  if (!labelled) r.table.labels.clear();
  const pare::FeatureTable input = r.table;
  pare::ScreenOptions so;
  const pare::SampleScreen screen = pare::screen_samples(input.values, so);
  r.options = options;
  if (r.options.keep == 0) r.options.keep = 30;
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
    INFO(pare::step_name(st.step));
    REQUIRE(r.html.find("data-step=\"" + std::string(pare::step_name(st.step)) + "\" data-in=\"" + std::to_string(st.in) +
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

namespace {

// Lines of a TSV text, split at tabs.
std::vector<std::vector<std::string>> tsv_rows(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);) {
    std::vector<std::string> f;
    std::istringstream cells(line);
    for (std::string cell; std::getline(cells, cell, '\t');) f.push_back(cell);
    rows.push_back(std::move(f));
  }
  return rows;
}

std::size_t column_of(const std::vector<std::string>& header, const std::string& name) {
  for (std::size_t k = 0; k < header.size(); ++k)
    if (header[k] == name) return k;
  FAIL("no column " << name);
  return 0;
}

// The value of attribute `name` in the first element of `html` that starts with `start`.
std::string attribute(const std::string& html, const std::string& start, const std::string& name) {
  const std::size_t at = html.find(start);
  if (at == std::string::npos) return "";
  const std::size_t end = html.find('>', at);
  const std::string element = html.substr(at, end - at);
  const std::size_t a = element.find(" " + name + "=\"");
  if (a == std::string::npos) return "";
  const std::size_t from = a + name.size() + 3;
  return element.substr(from, element.find('"', from) - from);
}

// The text from `start` to the next `end` (exclusive), or "".
std::string between(const std::string& html, const std::string& start, const std::string& end) {
  const std::size_t a = html.find(start);
  if (a == std::string::npos) return "";
  return html.substr(a, html.find(end, a) - a);
}

// The expected curve from selection-log.tsv: every feature with a score in `column`, by the
// score descending, ties in input order (as the ranking orders them); (input index, score text,
// q text).
struct Ranked {
  std::int64_t index;
  std::string score, q, status;
  double value;
};
std::vector<Ranked> ranked_from_log(const std::string& log, const std::string& column,
                                    const std::string& q_column) {
  const auto rows = tsv_rows(log);
  const std::size_t c = column_of(rows[0], column), idx = column_of(rows[0], "index"),
                    st = column_of(rows[0], "status");
  const std::size_t qc = q_column.empty() ? 0 : column_of(rows[0], q_column);
  std::vector<Ranked> out;
  for (std::size_t k = 1; k < rows.size(); ++k) {
    const auto& f = rows[k];
    if (f[c] == "NA") continue;
    out.push_back(
        {std::stoll(f[idx]), f[c], q_column.empty() ? "" : f[qc], f[st], std::stod(f[c])});
  }
  std::stable_sort(out.begin(), out.end(),
                   [](const Ranked& a, const Ranked& b) { return a.value > b.value; });
  return out;
}

std::vector<std::pair<std::int64_t, std::string>> curve_points(const std::string& html) {
  std::vector<std::pair<std::int64_t, std::string>> out;
  std::istringstream in(attribute(html, "<g class=\"score-curve\"", "data-points"));
  for (std::string point; in >> point;) {
    const std::size_t colon = point.find(':');
    out.emplace_back(std::stoll(point.substr(0, colon)), point.substr(colon + 1));
  }
  return out;
}

}  // namespace

TEST_CASE("report: the score curve is every scored feature's score by rank, with the cuts",
          "[report]") {
  pare::ReduceOptions o;
  o.keep = 12;
  o.fdr = 0.05;
  const Run r = reduce_and_report({}, o);
  // Reference: selection-log.tsv, the scores of every feature, ordered here by mi descending.
  const auto expected =
      ranked_from_log(pare::selection_log_tsv(r.table, r.reduction), "mi", "chi2_q");
  REQUIRE(expected.size() == 70);  // 80 minus 6 mostly missing minus 4 constant
  REQUIRE(attribute(r.html, "<g class=\"score-curve\"", "data-count") == "70");
  REQUIRE(attribute(r.html, "<g class=\"score-curve\"", "data-column") == "mi");
  const auto points = curve_points(r.html);
  // 70 ranks, more than a pixel apart even on the log axis: every one is a vertex.
  REQUIRE(points.size() == 70);
  for (const auto& [rank, value] : points) {
    INFO("rank " << rank);
    REQUIRE(value == expected[static_cast<std::size_t>(rank - 1)].score);
  }
  // --fdr: the last rank whose chi2_q is at most 0.05; --keep: where the 12th kept feature sits.
  std::int64_t fdr_rank = 0, passed = 0, keep_rank = 0, kept = 0;
  for (std::size_t k = 0; k < expected.size(); ++k) {
    if (std::stod(expected[k].q) <= 0.05) {
      fdr_rank = static_cast<std::int64_t>(k + 1);
      ++passed;
    }
    if (expected[k].status == "kept") {
      keep_rank = static_cast<std::int64_t>(k + 1);
      ++kept;
    }
  }
  REQUIRE(kept == 12);
  REQUIRE(keep_rank > 12);  // near-copies between them were pruned: the cut is not at 12
  REQUIRE(fdr_rank < 70);
  REQUIRE(attribute(r.html, "<g class=\"score-curve\"", "data-fdr-rank") ==
          std::to_string(fdr_rank));
  REQUIRE(attribute(r.html, "<g class=\"score-curve\"", "data-fdr-passed") ==
          std::to_string(passed));
  REQUIRE(attribute(r.html, "<g class=\"score-curve\"", "data-keep-rank") ==
          std::to_string(keep_rank));
  REQUIRE(r.html.find("--keep 12: the 12th kept at rank " + std::to_string(keep_rank)) !=
          std::string::npos);
  REQUIRE(r.html.find("--fdr 0.05: last q \xE2\x89\xA4 0.05 at rank " + std::to_string(fdr_rank)) !=
          std::string::npos);
}

TEST_CASE("report: the p-value histogram counts the ranking test's p of every scored feature",
          "[report]") {
  const Run r = reduce_and_report();
  // Reference: selection-log.tsv's chi2_p (the test mi is filtered with), binned by hand into
  // [k/20, (k+1)/20), 1 in the last bin (numpy.histogram's rule for 20 bins on [0, 1]).
  const auto rows = tsv_rows(pare::selection_log_tsv(r.table, r.reduction));
  const std::size_t pc = column_of(rows[0], "chi2_p");
  std::vector<std::int64_t> expected(20, 0);
  std::int64_t scored = 0;
  for (std::size_t k = 1; k < rows.size(); ++k) {
    if (rows[k][pc] == "NA") continue;
    const double p = std::stod(rows[k][pc]);
    // No p-value within rounding of an inner edge, so the two ways of binning agree.
    REQUIRE((p == 0 || p == 1 || std::abs(p * 20 - std::round(p * 20)) > 1e-9));
    expected[std::min<std::size_t>(19, static_cast<std::size_t>(std::floor(p * 20)))]++;
    ++scored;
  }
  REQUIRE(scored == 70);
  const std::string figure = between(r.html, "<h3 id=\"p-values\">", "</figure>");
  REQUIRE(!figure.empty());
  const std::regex bin(
      R"re(<g class="bin" data-from="([^"]*)" data-to="([^"]*)" data-count="(\d+)">)re");
  std::vector<std::int64_t> shown(20, 0);
  std::int64_t total = 0;
  for (auto it = std::sregex_iterator(figure.begin(), figure.end(), bin);
       it != std::sregex_iterator(); ++it) {
    const double from = std::stod((*it)[1]);
    const auto k = static_cast<std::size_t>(std::llround(from * 20));
    REQUIRE(k < 20);
    shown[k] = std::stoll((*it)[3]);
    total += shown[k];
  }
  REQUIRE(total == 70);
  REQUIRE(shown == expected);
  REQUIRE(expected[0] >= 20);  // the informative features: a spike at the left, so the check bites
  REQUIRE(figure.find("expected with no signal: 3.5 per bar") != std::string::npos);
}

TEST_CASE("report: parts without data are left out; without labels the curve is of variance",
          "[report]") {
  pare::ReportData d;
  d.command = "scan";
  d.title = "t";
  const std::string bare = pare::report_html(d);
  for (const char* absent : {"score-curve", "id=\"p-values\"", "top-features", "class=\"strip\"",
                             "class=\"caution\"", "section id=\"ranking\""}) {
    INFO(absent);
    REQUIRE(bare.find(absent) == std::string::npos);
  }
  // Unlabelled: ranked by variance; a curve, no p-values, and no word of label-chosen features.
  const Run u = reduce_and_report({}, {}, false);
  REQUIRE(attribute(u.html, "<g class=\"score-curve\"", "data-column") == "variance");
  // Reference: selection-log.tsv's variance of the features past the missing and variance
  // filters, largest first.
  std::vector<std::string> expected;
  for (const auto& e :
       ranked_from_log(pare::selection_log_tsv(u.table, u.reduction), "variance", "")) {
    const pare::Step step = u.reduction.decisions[static_cast<std::size_t>(e.index - 1)].step;
    if (step != pare::Step::kMissing && step != pare::Step::kVariance) expected.push_back(e.score);
  }
  REQUIRE(expected.size() == 70);
  REQUIRE(attribute(u.html, "<g class=\"score-curve\"", "data-count") == "70");
  const auto points = curve_points(u.html);
  REQUIRE(points.size() == 70);
  for (const auto& [rank, value] : points)
    REQUIRE(value == expected[static_cast<std::size_t>(rank - 1)]);
  REQUIRE(u.html.find("id=\"p-values\"") == std::string::npos);
  REQUIRE(!u.report.chosen_with_labels);
  // No ranking at all: no curve.
  pare::ReduceOptions none;
  none.relevance = false;
  const Run n = reduce_and_report({}, none);
  REQUIRE(n.html.find("score-curve") == std::string::npos);
  REQUIRE(n.html.find("No ranking ran") != std::string::npos);
}

TEST_CASE("report: strip plots of the top kept features hold the table's values by class",
          "[report]") {
  Run r = reduce_and_report();
  const std::vector<std::int64_t>& kept = r.reduction.kept;
  pare::add_top_features(r.report, r.table, kept, "as in reduced.csv");
  const std::string html = pare::report_html(r.report);
  REQUIRE(html.find("<section id=\"top-features\">") != std::string::npos);
  REQUIRE(html.find("quartile) and the black line is the median. As in reduced.csv.</p>") !=
          std::string::npos);
  const std::regex dot(
      R"re(<circle cx="([^"]*)" cy="[^"]*" r="[^"]*" fill="[^"]*" fill-opacity="0.7" data-value="([^"]*)"><title>([^ ]+) )re");
  std::vector<std::map<std::string, std::string>> offsets;
  for (std::size_t f = 0; f < 7; ++f) {
    const std::string start = "<g class=\"strip\" data-rank=\"" + std::to_string(f + 1) + "\"";
    if (f == 6) {
      REQUIRE(html.find(start) == std::string::npos);  // at most 6
      break;
    }
    const std::string strip = between(html, start, "</svg>");
    REQUIRE(!strip.empty());
    const auto j = static_cast<Eigen::Index>(kept[f]);
    REQUIRE(attribute(strip, "<g class=\"strip\"", "data-feature") ==
            r.table.feature_names[static_cast<std::size_t>(j)]);
    // Every sample's dot carries the table's float as the output files write it.
    std::map<std::string, std::string> cx;
    for (auto it = std::sregex_iterator(strip.begin(), strip.end(), dot);
         it != std::sregex_iterator(); ++it) {
      const std::string id = (*it)[3];
      const auto i = static_cast<Eigen::Index>(std::stoll(id.substr(1)) - 1);
      // Reference: std::to_chars, the shortest text that reads back as the same float.
      char buffer[32];
      const auto end = std::to_chars(buffer, buffer + sizeof buffer, r.table.values(i, j)).ptr;
      REQUIRE((*it)[2] == std::string(buffer, end));
      cx[id] = (*it)[1];
    }
    REQUIRE(cx.size() == 60);
    offsets.push_back(cx);
    // Each class's median and quartiles (numpy.quantile's default, linear between order
    // statistics) of the same values, computed here.
    for (const char* cls : {"dry", "wet"}) {
      std::vector<double> v;
      for (Eigen::Index i = 0; i < 60; ++i)
        if (r.table.labels[static_cast<std::size_t>(i)] == cls) v.push_back(r.table.values(i, j));
      std::sort(v.begin(), v.end());
      const auto q = [&](double p) {
        const double h = p * static_cast<double>(v.size() - 1);
        const auto lo = static_cast<std::size_t>(h);
        return v[lo] + (h - static_cast<double>(lo)) * (v[std::min(lo + 1, v.size() - 1)] - v[lo]);
      };
      const std::string group = between(strip, std::string("data-class=\"") + cls + "\"", ">");
      INFO(group);
      REQUIRE(group.find(std::string("data-n=\"") + (cls[0] == 'd' ? "20" : "40") + "\"") !=
              std::string::npos);
      for (const auto& [name, p] : {std::pair<const char*, double>{"data-q1", 0.25},
                                    {"data-median", 0.5},
                                    {"data-q3", 0.75}}) {
        const double shown = std::stod(attribute("<g " + group + ">", "<g", name));
        // Tolerance: the same interpolation in double on float inputs; only the order of two
        // roundings may differ.
        REQUIRE(std::abs(shown - q(p)) <= 1e-12 * (1 + std::abs(q(p))));
      }
    }
  }
  // The jitter is a fixed offset per sample: the same in every strip, not the same for all.
  for (std::size_t f = 1; f < offsets.size(); ++f) REQUIRE(offsets[f] == offsets[0]);
  std::set<std::string> distinct;
  for (const auto& [id, x] : offsets[0]) distinct.insert(x);
  REQUIRE(distinct.size() > 30);
  // Deterministic: the same page again.
  Run again = reduce_and_report();
  pare::add_top_features(again.report, again.table, again.reduction.kept, "as in reduced.csv");
  for (auto* d : {&r.report, &again.report})
    for (auto& st : d->steps) st.seconds = 0;
  REQUIRE(pare::report_html(r.report) == pare::report_html(again.report));
  // A column that is not in the table is a caller's mistake.
  const std::vector<std::int64_t> bad{80};
  REQUIRE_THROWS_AS(pare::add_top_features(r.report, r.table, bad, ""), std::out_of_range);
}

TEST_CASE("report: strip plot quartiles, samples without a label, and no labels", "[report]") {
  // Hand-computed quartiles by linear interpolation between order statistics (Hyndman & Fan
  // 1996, definition 7; numpy.quantile's default): {1,2,3,4} -> 1.75, 2.5, 3.25;
  // {10,20,30,40,50} -> 20, 30, 40.
  pare::FeatureTable t;
  t.values.resize(10, 1);
  const float v[] = {3, 1, 4, 2, 50, 10, 40, 20, 30, 99};
  for (Eigen::Index i = 0; i < 10; ++i) {
    t.values(i, 0) = v[i];
    t.sample_ids.push_back(numbered("s", i + 1));
    t.labels.push_back(i < 4 ? "a" : i < 9 ? "b" : "");
  }
  t.feature_names = {"x"};
  t.label_name = "group";
  pare::ReportData d;
  d.command = "reduce";
  d.title = "t";
  const std::vector<std::int64_t> col{0};
  pare::add_top_features(d, t, col, "");
  const std::string html = pare::report_html(d);
  const auto group = [&](const char* cls) {
    return "<g " + between(html, std::string("data-class=\"") + cls + "\"", ">") + ">";
  };
  REQUIRE(attribute(group("a"), "<g", "data-q1") == "1.75");
  REQUIRE(attribute(group("a"), "<g", "data-median") == "2.5");
  REQUIRE(attribute(group("a"), "<g", "data-q3") == "3.25");
  REQUIRE(attribute(group("b"), "<g", "data-q1") == "20");
  REQUIRE(attribute(group("b"), "<g", "data-median") == "30");
  REQUIRE(attribute(group("b"), "<g", "data-q3") == "40");
  // The sample without a label is counted, not drawn.
  REQUIRE(html.find("1 sample without a label is not shown.") != std::string::npos);
  REQUIRE(html.find("data-value=\"99\"") == std::string::npos);
  REQUIRE(occurrences(html, "fill-opacity=\"0.7\" data-value=") == 9);
  // Without labels: one strip of every sample.
  t.labels.clear();
  pare::add_top_features(d, t, col, "");
  const std::string plain = pare::report_html(d);
  REQUIRE(attribute(plain, "<g class=\"strip-group\"", "data-class") == "all samples");
  REQUIRE(attribute(plain, "<g class=\"strip-group\"", "data-n") == "10");
  REQUIRE(occurrences(plain, "fill-opacity=\"0.7\" data-value=") == 10);
  // Every sample without a label: nothing to draw, no section.
  t.labels.assign(10, "");
  pare::add_top_features(d, t, col, "");
  REQUIRE(pare::report_html(d).find("top-features") == std::string::npos);
}

namespace {

// The colour of each legend entry of the legend that follows `heading`.
std::map<std::string, std::string> legend_colours(const std::string& html,
                                                  const std::string& heading) {
  std::map<std::string, std::string> out;
  const std::string list = between(html, heading, "</ul>");
  const std::regex item(R"re(fill="(#[0-9A-Fa-f]{6})"/></svg> ([^<]*) \((\d+)\)</li>)re");
  for (auto it = std::sregex_iterator(list.begin(), list.end(), item); it != std::sregex_iterator();
       ++it)
    out[(*it)[2]] = (*it)[1];
  return out;
}

// (sample id, mark text, fill) of every dot of the scatter plot labelled `aria`.
std::vector<std::tuple<std::string, std::string, std::string>> marked_dots(
    const std::string& html, const std::string& aria) {
  std::vector<std::tuple<std::string, std::string, std::string>> out;
  const std::string svg = between(html, "aria-label=\"" + aria + "\"", "</svg>");
  const std::regex dot(
      R"re(fill="(#[0-9A-Fa-f]{6})" fill-opacity="0.8"><title>([^ ]+) · [^<]*· batch ([^<·]*?)(?: · [^<]*)?</title>)re");
  for (auto it = std::sregex_iterator(svg.begin(), svg.end(), dot); it != std::sregex_iterator();
       ++it)
    out.emplace_back((*it)[2], (*it)[3], (*it)[1]);
  return out;
}

}  // namespace

TEST_CASE("report: --mark-by draws the sample plots again, coloured by the sheet column",
          "[report]") {
  Run r = reduce_and_report();
  pare::ReportSamples& si = r.report.sample_info;
  si.mark_name = "batch";
  for (std::size_t i = 0; i < si.ids.size(); ++i)
    si.marks.push_back(i % 10 == 9 ? "" : i % 2 == 0 ? "A" : "B");
  const std::string html = pare::report_html(r.report);
  REQUIRE(occurrences(html, "aria-label=\"Samples on PC1 and PC2\"") == 1);
  REQUIRE(occurrences(html, "aria-label=\"Samples on PC1 and PC2 by batch\"") == 1);
  REQUIRE(occurrences(html, "aria-label=\"Samples on PC1 and PC3 by batch\"") == 1);
  const auto legend = legend_colours(html, "<strong>batch:</strong>");
  REQUIRE(legend.size() == 3);
  REQUIRE(legend.count("A") == 1);
  REQUIRE(legend.count("B") == 1);
  REQUIRE(legend.count("missing") == 1);
  REQUIRE(html.find("missing (6)</li>") != std::string::npos);
  REQUIRE(html.find("A (30)</li>") != std::string::npos);  // 0, 2, ..., 58 minus none ending in 9
  // Every sample's dot: its mark on hover, the legend's colour for that mark.
  const auto dots = marked_dots(html, "Samples on PC1 and PC2 by batch");
  REQUIRE(dots.size() == 60);
  for (const auto& [id, mark, fill] : dots) {
    const std::size_t i = static_cast<std::size_t>(std::stoll(id.substr(1)) - 1);
    INFO(id);
    REQUIRE(mark == (si.marks[i].empty() ? "missing" : si.marks[i]));
    REQUIRE(fill == legend.at(mark));
  }
  REQUIRE(legend.at("A") != legend.at("B"));
  // No marks: the plots are drawn once.
  si.marks.clear();
  REQUIRE(pare::report_html(r.report).find("by batch") == std::string::npos);

  // 12 distinct values: the 7 most frequent coloured, the other 5 one grey "other".
  for (std::size_t i = 0; i < si.ids.size(); ++i)
    si.marks.push_back("v" + std::to_string(i < 24 ? i % 4 : 4 + i % 8));  // v0..v3 most frequent
  const std::string many = pare::report_html(r.report);
  REQUIRE(many.find("batch has 12 distinct values: the 7 most frequent have a colour each, the "
                    "other 5 (") != std::string::npos);
  const auto many_legend = legend_colours(many, "<strong>batch:</strong>");
  REQUIRE(many_legend.size() == 8);
  REQUIRE(many_legend.count("other (5 values)") == 1);
  for (const char* v : {"v0", "v1", "v2", "v3"}) REQUIRE(many_legend.count(v) == 1);
  std::set<std::string> colours;
  for (const auto& [name, colour] : many_legend) colours.insert(colour);
  REQUIRE(colours.size() == 8);
  for (const auto& [id, mark, fill] : marked_dots(many, "Samples on PC1 and PC2 by batch"))
    REQUIRE(fill ==
            (many_legend.count(mark) ? many_legend.at(mark) : many_legend.at("other (5 values)")));
}

TEST_CASE("report: components of label-chosen features say the separation is expected",
          "[report]") {
  Run r = reduce_and_report();
  REQUIRE(r.report.chosen_with_labels);
  // Without --components the plots are the screen's PCA of the input: no caution.
  REQUIRE(r.html.find("class=\"caution\"") == std::string::npos);
  pare::ProjectionOptions po;
  po.components = 3;
  pare::Matrix kept(60, static_cast<Eigen::Index>(r.reduction.kept.size()));
  for (std::size_t k = 0; k < r.reduction.kept.size(); ++k)
    kept.col(static_cast<Eigen::Index>(k)) = r.table.values.col(r.reduction.kept[k]);
  const pare::Projection pr = pare::truncated_pca(kept, po);
  pare::add_components(r.report, pr, "the 30 kept features");
  const std::string html = pare::report_html(r.report);
  REQUIRE(html.find("<p class=\"caution\">These features were selected using the labels (group), "
                    "so the classes are expected to separate") != std::string::npos);
  // The same components of an unsupervised reduction: no caution.
  Run u = reduce_and_report({}, {}, false);
  pare::add_components(u.report, pr, "kept");
  REQUIRE(pare::report_html(u.report).find("class=\"caution\"") == std::string::npos);
}

TEST_CASE("report: add_ranking (pare rank) fills the bars, the curve and the p-values",
          "[report]") {
  const pare::FeatureTable t = small_table();
  const pare::ClassCodes classes = pare::encode_classes(t.labels);
  std::vector<std::int64_t> all(80);
  for (std::size_t j = 0; j < all.size(); ++j) all[j] = static_cast<std::int64_t>(j);
  const pare::FeatureScores s = pare::score_features(t.values, all, classes, {});
  const std::vector<std::size_t> order = pare::rank_order(s, pare::Criterion::kF);
  // As pare rank selects: q <= 0.01, then the first 15.
  std::vector<std::size_t> kept;
  for (const std::size_t i : order)
    if (pare::criterion_q(s, pare::Criterion::kF, i) <= 0.01 && kept.size() < 15) kept.push_back(i);
  REQUIRE(kept.size() == 15);
  pare::ReportData d;
  d.command = "rank";
  d.title = "pare rank: small.csv";
  pare::add_ranking(d, t, s, order, kept, pare::Criterion::kF, 0.01, 15);
  const std::string html = pare::report_html(d);
  // The bars: the kept features, F and f_q as ranking_tsv writes them.
  const auto tsv = tsv_rows(pare::ranking_tsv(s, kept, t.feature_names, false));
  const std::size_t fc = column_of(tsv[0], "f"), qc = column_of(tsv[0], "f_q");
  for (std::size_t k = 0; k < kept.size(); ++k) {
    const std::string start = "<g class=\"feature\" data-rank=\"" + std::to_string(k + 1) + "\"";
    REQUIRE(attribute(html, start, "data-name") == tsv[k + 1][1]);
    REQUIRE(attribute(html, start, "data-value") == tsv[k + 1][fc]);
    REQUIRE(attribute(html, start, "data-q") == tsv[k + 1][qc]);
  }
  REQUIRE(html.find("data-rank=\"16\"") == std::string::npos);
  // The curve: all 80 features (constant and mostly-missing ones too, as rank scores them).
  REQUIRE(attribute(html, "<g class=\"score-curve\"", "data-count") == "80");
  REQUIRE(attribute(html, "<g class=\"score-curve\"", "data-column") == "f");
  const auto everything = tsv_rows(pare::ranking_tsv(s, order, t.feature_names, false));
  for (const auto& [rank, value] : curve_points(html))
    REQUIRE(value == everything[static_cast<std::size_t>(rank)][fc]);
  REQUIRE(attribute(html, "<g class=\"score-curve\"", "data-keep-rank") == "15");
  // p-values of the F-test: 80 features in the bins.
  const std::string figure = between(html, "<h3 id=\"p-values\">", "</figure>");
  REQUIRE(figure.find("p-values of the one-way ANOVA F-test") != std::string::npos);
  std::int64_t total = 0;
  const std::regex bin(R"re(<g class="bin" [^>]*data-count="(\d+)">)re");
  for (auto it = std::sregex_iterator(figure.begin(), figure.end(), bin);
       it != std::sregex_iterator(); ++it)
    total += std::stoll((*it)[1]);
  REQUIRE(total == 80);
}

TEST_CASE("report: 10,000 samples: strip plots and marked plots thinned, page bounded",
          "[report]") {
  std::mt19937_64 rng(11);
  std::normal_distribution<double> normal(0.0, 1.0);
  pare::FeatureTable t;
  const Eigen::Index n = 10000;
  t.values.resize(n, 8);
  for (Eigen::Index i = 0; i < n; ++i) {
    t.sample_ids.push_back(numbered("sample_", i));
    t.labels.push_back(i % 3 == 0 ? "a" : "b");
    for (Eigen::Index j = 0; j < 8; ++j) t.values(i, j) = static_cast<float>(normal(rng));
  }
  for (int j = 0; j < 8; ++j) t.feature_names.push_back(numbered("f", j));
  pare::ReportData d;
  d.command = "reduce";
  d.title = "wide";
  d.components.source = "kept";
  d.components.ratio = {0.3, 0.2, 0.1};
  d.components.cumulative = {0.3, 0.5, 0.6};
  d.components.scores.resize(3);
  pare::ReportSamples& s = d.sample_info;
  s.ids = t.sample_ids;
  s.labels = t.labels;
  s.mark_name = "site";
  for (Eigen::Index i = 0; i < n; ++i) {
    s.marks.push_back(numbered("site", i % 20));
    for (auto& c : d.components.scores) c.push_back(normal(rng));
  }
  const std::vector<std::int64_t> cols{0, 1, 2, 3, 4, 5, 6, 7};
  pare::add_top_features(d, t, cols, "");
  const std::string html = pare::report_html(d);
  INFO(html.size() << " bytes");
  REQUIRE(html.size() < 2'500'000);
  // 6 strips of one sample in 17 (589 of 10,000), and four scatter plots of 2,500.
  REQUIRE(occurrences(html, "<g class=\"strip\" ") == 6);
  REQUIRE(occurrences(html, "fill-opacity=\"0.7\" data-value=") == 6 * 589);
  REQUIRE(html.find("One sample in 17 is drawn (589 of 10,000); the boxes use every sample.") !=
          std::string::npos);
  REQUIRE(occurrences(html, "2,500 of 10,000 samples drawn (one in 4") == 4);
  REQUIRE(html.find("site has 20 distinct values") != std::string::npos);
}

namespace {

// Hand-made scores of 5 features against a continuous target (the values are chosen, not
// computed: these tests check what the page shows, against ranking.tsv as the library writes it).
pare::FeatureScores target_scores() {
  pare::FeatureScores s;
  s.continuous = true;
  s.feature = {0, 1, 2, 3, 4};
  s.pearson_r = {0.9, -0.95, 0.1, -0.3, 0.5};
  s.pearson_p = {1e-3, 1e-4, 0.8, 0.4, 0.2};
  s.pearson_q = {2.5e-3, 5e-4, 0.8, 0.5, 1.0 / 3};
  s.spearman_rho = {0.85, -0.9, 0.05, -0.35, 0.45};
  s.spearman_p = {2e-3, 3e-4, 0.9, 0.3, 0.25};
  s.spearman_q = {5e-3, 1.5e-3, 0.9, 0.375, 0.375};
  s.mi = {0.6, 0.8, 0.01, 0.05, 0.2};
  s.variance = {1, 2, 3, 4, 5};
  s.missing_rate = {0, 0, 0, 0, 0};
  s.flags = {0, 0, 0, 0, 0};
  s.defined.assign(5, 0xFF);
  return s;
}

// 8 samples x 5 features with a target named "progression".
pare::FeatureTable target_table() {
  pare::FeatureTable t;
  t.values.resize(8, 5);
  for (Eigen::Index i = 0; i < 8; ++i) {
    t.sample_ids.push_back(numbered("s", i + 1));
    t.target.push_back(10.0 * static_cast<double>(i + 1));
    for (Eigen::Index j = 0; j < 5; ++j) t.values(i, j) = static_cast<float>(i * (j + 1) % 7);
  }
  for (int j = 0; j < 5; ++j) t.feature_names.push_back(numbered("f", j));
  t.label_name = "progression";
  return t;
}

// The text of `html` with every attribute value and tag name removed, so words in class="..."
// attributes or elements do not count as text.
std::string visible_text(const std::string& html) {
  return std::regex_replace(html, std::regex("<[^>]*>"), " ");
}

}  // namespace

TEST_CASE("report: a continuous target: the ranking in the target's words, signed r, |r| bars",
          "[report]") {
  const pare::FeatureTable t = target_table();
  const pare::FeatureScores s = target_scores();
  const std::vector<std::size_t> order = pare::rank_order(s, pare::Criterion::kPearson);
  REQUIRE(order == std::vector<std::size_t>{1, 0, 4, 3, 2});  // by |r|
  const std::vector<std::size_t> kept{1, 0, 4, 3};
  pare::ReportData d;
  d.command = "rank";
  d.title = "pare rank: t.csv";
  pare::add_ranking(d, t, s, order, kept, pare::Criterion::kPearson, 1, 4);
  REQUIRE(d.ranking.continuous);
  const std::string html = pare::report_html(d);
  // The bars carry ranking.tsv's signed pearson_r and pearson_q; they print the sign, the bar is
  // |r|.
  const auto tsv = tsv_rows(pare::ranking_tsv(s, kept, t.feature_names, false));
  const std::size_t rc = column_of(tsv[0], "pearson_r"), qc = column_of(tsv[0], "pearson_q");
  for (std::size_t k = 0; k < kept.size(); ++k) {
    const std::string start = "<g class=\"feature\" data-rank=\"" + std::to_string(k + 1) + "\"";
    REQUIRE(attribute(html, start, "data-name") == tsv[k + 1][1]);
    REQUIRE(attribute(html, start, "data-value") == tsv[k + 1][rc]);
    REQUIRE(attribute(html, start, "data-q") == tsv[k + 1][qc]);
  }
  REQUIRE(tsv[1][rc] == "-0.95");
  REQUIRE(html.find("<title>1. f1: -0.95, q = 0.0005 \xE2\x80\x94 Pearson r -0.95, Spearman rho "
                    "-0.9</title>") != std::string::npos);
  REQUIRE(html.find("<tspan class=\"num\">-0.95</tspan>") != std::string::npos);
  // Bar lengths: |r| on one scale, so -0.95's bar is longer than 0.9's (widths from the x scale).
  const std::regex bar(
      R"re(<rect x="[^"]*" y="[^"]*" width="([^"]*)" height="[^"]*" fill="#0072B2"/>)re");
  std::vector<double> widths;
  const std::string bars = between(html, "<g class=\"feature\" data-rank=\"1\"", "</svg>");
  for (auto it = std::sregex_iterator(bars.begin(), bars.end(), bar); it != std::sregex_iterator();
       ++it)
    widths.push_back(std::stod((*it)[1]));
  REQUIRE(widths.size() == 4);
  // Reference: |r| in ranking order, 0.95, 0.9, 0.5, 0.3, proportional to the widths (1 decimal).
  for (std::size_t k = 1; k < 4; ++k)
    REQUIRE(std::abs(widths[k] / widths[0] - std::abs(s.pearson_r[kept[k]]) / 0.95) < 0.002);
  // The curve: |r| by rank, marked as magnitudes.
  REQUIRE(attribute(html, "<g class=\"score-curve\"", "data-column") == "pearson_r");
  REQUIRE(attribute(html, "<g class=\"score-curve\"", "data-absolute") == "true");
  std::vector<std::string> points;
  for (const auto& [rank, value] : curve_points(html)) points.push_back(value);
  REQUIRE(points == std::vector<std::string>{"0.95", "0.9", "0.5", "0.3", "0.1"});
  REQUIRE(html.find("|pearson_r| of the feature at each rank") != std::string::npos);
  // The p-values: Pearson's test, 20 bins of 0.05 (an edge goes up): 1e-4, 1e-3 in the first,
  // 0.2 in the fifth, 0.4 in the ninth, 0.8 in the seventeenth.
  const std::string figure = between(html, "<h3 id=\"p-values\">", "</figure>");
  REQUIRE(figure.find("p-values of the t test of Pearson&#39;s r (two-sided)") !=
          std::string::npos);
  REQUIRE(figure.find("p-value (pearson_p)") != std::string::npos);
  REQUIRE(figure.find("If no feature were related to the target the p-values") !=
          std::string::npos);
  std::map<std::string, std::string> bins;
  const std::regex bin(R"re(<g class="bin" data-from="([^"]*)" [^>]*data-count="(\d+)">)re");
  for (auto it = std::sregex_iterator(figure.begin(), figure.end(), bin);
       it != std::sregex_iterator(); ++it)
    if ((*it)[2] != "0") bins[(*it)[1]] = (*it)[2];
  REQUIRE(bins ==
          std::map<std::string, std::string>{{"0", "2"}, {"0.2", "1"}, {"0.4", "1"}, {"0.8", "1"}});
  // No class wording anywhere in the ranking section's text.
  const std::string section = visible_text(between(html, "<section id=\"ranking\">", "</section>"));
  REQUIRE(!section.empty());
  for (const char* word : {"class", "label", "chi2", "chi-square", "f_q", "ANOVA"}) {
    INFO(word);
    REQUIRE(section.find(word) == std::string::npos);
  }
  REQUIRE(section.find("|Pearson r| with the target") != std::string::npos);
  REQUIRE(section.find("negative: the feature falls as progression rises") != std::string::npos);
  REQUIRE(visible_text(html).find("Leading feature:  f1  (pearson -0.95, q 0.0005)") !=
          std::string::npos);

  // Ranked by mi against a target: the q-values and p-values are Spearman's.
  const std::vector<std::size_t> by_mi = pare::rank_order(s, pare::Criterion::kMi);
  pare::add_ranking(d, t, s, by_mi, by_mi, pare::Criterion::kMi, 1, 0);
  const std::string mi = pare::report_html(d);
  REQUIRE(attribute(mi, "<g class=\"feature\" data-rank=\"1\"", "data-value") == "0.8");
  REQUIRE(attribute(mi, "<g class=\"feature\" data-rank=\"1\"", "data-q") == "0.0015");
  REQUIRE(attribute(mi, "<g class=\"score-curve\"", "data-absolute").empty());
  REQUIRE(mi.find("p-value (spearman_p)") != std::string::npos);
  REQUIRE(mi.find("mutual information with the target (nats)") != std::string::npos);
  REQUIRE(mi.find("MI has no test of its own: --fdr uses Spearman&#39;s.") != std::string::npos);
  REQUIRE(visible_text(between(mi, "<section id=\"ranking\">", "</section>")).find("class") ==
          std::string::npos);
  // Spearman: rho signed, its own test.
  const std::vector<std::size_t> by_rho = pare::rank_order(s, pare::Criterion::kSpearman);
  pare::add_ranking(d, t, s, by_rho, by_rho, pare::Criterion::kSpearman, 0.01, 0);
  const std::string rho = pare::report_html(d);
  REQUIRE(attribute(rho, "<g class=\"feature\" data-rank=\"1\"", "data-value") == "-0.9");
  REQUIRE(attribute(rho, "<g class=\"feature\" data-rank=\"1\"", "data-q") == "0.0015");
  REQUIRE(attribute(rho, "<g class=\"score-curve\"", "data-fdr-passed") == "2");  // q 0.0015, 0.005
  REQUIRE(rho.find("A bar&#39;s length is |rho|") != std::string::npos);
  REQUIRE(rho.find("p-value (spearman_p)") != std::string::npos);
}

namespace {

struct TargetDot {
  double cx, cy;
  std::string target, value, id;
};

// Every dot of the target scatter plot of rank `rank`.
std::vector<TargetDot> target_dots(const std::string& html, int rank) {
  const std::string panel = between(
      html, "<g class=\"target-scatter\" data-rank=\"" + std::to_string(rank) + "\"", "</svg>");
  const std::regex dot(
      R"re(<circle cx="([^"]*)" cy="([^"]*)" r="[^"]*" fill="#0072B2" fill-opacity="0.7" data-target="([^"]*)" data-value="([^"]*)"><title>([^ ]+) )re");
  std::vector<TargetDot> out;
  for (auto it = std::sregex_iterator(panel.begin(), panel.end(), dot);
       it != std::sregex_iterator(); ++it)
    out.push_back({std::stod((*it)[1]), std::stod((*it)[2]), (*it)[3], (*it)[4], (*it)[5]});
  return out;
}

}  // namespace

TEST_CASE("report: a continuous target: top features as scatter plots against it", "[report]") {
  // 6 samples; the 6th has no target value, the 2nd no value of feature b.
  pare::FeatureTable t;
  t.values.resize(6, 2);
  const float a[] = {1, 2, 3, 4, 5, 6}, b[] = {5, kGap, 3, 2, 1, 0};
  for (Eigen::Index i = 0; i < 6; ++i) {
    t.sample_ids.push_back(numbered("s", i + 1));
    t.values(i, 0) = a[i];
    t.values(i, 1) = b[i];
  }
  t.target = {10, 20, 30, 40, 50, std::numeric_limits<double>::quiet_NaN()};
  t.feature_names = {"a", "b"};
  t.label_name = "progression";
  pare::ReportData d;
  d.command = "reduce";
  d.title = "t";
  // Correlations for the captions, as a ranking would give them.
  pare::ReportBar bar;
  bar.name = "a";
  bar.pearson_r = 1;
  bar.spearman_rho = 1;
  d.ranking.bars.push_back(bar);
  const std::vector<std::int64_t> cols{0, 1};
  pare::add_top_features(d, t, cols, "values as in reduced.csv (filled)");
  REQUIRE(d.top_features.target.size() == 6);
  REQUIRE(std::equal(t.target.begin(), t.target.begin() + 5, d.top_features.target.begin()));
  REQUIRE(std::isnan(d.top_features.target[5]));
  const std::string html = pare::report_html(d);
  REQUIRE(html.find("<g class=\"strip\"") == std::string::npos);
  REQUIRE(occurrences(html, "<g class=\"target-scatter\"") == 2);
  REQUIRE(attribute(html, "<g class=\"target-scatter\" data-rank=\"2\"", "data-feature") == "b");
  REQUIRE(html.find("aria-label=\"Values of a against progression\"") != std::string::npos);
  // The frame, stated here: the plot spans x 56..290 and y 206 (bottom)..26 (top), each axis the
  // shown values' range widened by 6% on both sides; coordinates are written with one decimal.
  const auto px = [](double v, double lo, double hi) {
    const double pad = (hi - lo) * 0.06;
    return 56 + (v - (lo - pad)) / (hi - lo + 2 * pad) * (290 - 56);
  };
  const auto py = [](double v, double lo, double hi) {
    const double pad = (hi - lo) * 0.06;
    return 206 - (v - (lo - pad)) / (hi - lo + 2 * pad) * (206 - 26);
  };
  // Feature a: one dot per sample with a target value (s1..s5), target 10..50, values 1..5.
  const auto dots_a = target_dots(html, 1);
  REQUIRE(dots_a.size() == 5);
  for (std::size_t k = 0; k < dots_a.size(); ++k) {
    INFO(dots_a[k].id);
    REQUIRE(dots_a[k].id == numbered("s", static_cast<std::int64_t>(k + 1)));
    REQUIRE(dots_a[k].target == std::to_string(10 * (k + 1)));
    REQUIRE(dots_a[k].value == std::to_string(k + 1));
    REQUIRE(std::abs(dots_a[k].cx - px(10.0 * static_cast<double>(k + 1), 10, 50)) <= 0.051);
    REQUIRE(std::abs(dots_a[k].cy - py(static_cast<double>(k + 1), 1, 5)) <= 0.051);
  }
  // Hand-computed: s1 at x = 56 + 2.4 / 44.8 * 234 = 68.54, y = 206 - 0.24 / 4.48 * 180 = 196.36.
  REQUIRE(html.find("<circle cx=\"68.5\" cy=\"196.4\"") != std::string::npos);
  // Feature b: s2 has no value (not drawn), values 5, 3, 2, 1 over the shown samples.
  const auto dots_b = target_dots(html, 2);
  REQUIRE(dots_b.size() == 4);
  for (const auto& dot : dots_b) {
    const std::size_t i = static_cast<std::size_t>(std::stoll(dot.id.substr(1)) - 1);
    REQUIRE(std::abs(dot.cx - px(t.target[i], 10, 50)) <= 0.051);
    REQUIRE(std::abs(dot.cy - py(b[i], 1, 5)) <= 0.051);
  }
  // The captions: the correlations where the ranking has them; the notes on what is not drawn.
  REQUIRE(html.find("<figcaption>Spearman rho 1, Pearson r 1</figcaption>") != std::string::npos);
  REQUIRE(occurrences(html, "<figcaption>Spearman rho") == 1);
  REQUIRE(
      html.find(
          "1 sample without a value of progression is not shown. 1 value missing is not shown.") !=
      std::string::npos);
  REQUIRE(html.find("<title>s3 \xC2\xB7 progression 30 \xC2\xB7 3</title>") != std::string::npos);
  REQUIRE(html.find("Values as in reduced.csv (filled).") != std::string::npos);
  REQUIRE(
      visible_text(between(html, "<section id=\"top-features\">", "</section>")).find("class") ==
      std::string::npos);
  // Deterministic.
  REQUIRE(pare::report_html(d) == html);

  // 1,500 samples: one in 3 drawn (500), the same samples in every plot.
  pare::FeatureTable wide;
  wide.values.resize(1500, 2);
  for (Eigen::Index i = 0; i < 1500; ++i) {
    wide.sample_ids.push_back(numbered("s", i + 1));
    wide.target.push_back(static_cast<double>(i % 97));
    wide.values(i, 0) = static_cast<float>(i % 13);
    wide.values(i, 1) = static_cast<float>(i % 7);
  }
  wide.feature_names = {"x", "y"};
  wide.label_name = "dose";
  pare::add_top_features(d, wide, cols, "");
  const std::string thin = pare::report_html(d);
  const auto first = target_dots(thin, 1), second = target_dots(thin, 2);
  REQUIRE(first.size() == 500);
  REQUIRE(second.size() == 500);
  for (std::size_t k = 0; k < first.size(); ++k) {
    REQUIRE(first[k].id == numbered("s", static_cast<std::int64_t>(3 * k + 1)));
    REQUIRE(second[k].id == first[k].id);
  }
  REQUIRE(thin.find("One sample in 3 is drawn (500 of 1,500).") != std::string::npos);
}

TEST_CASE("report: a continuous target: sample plots on a light-to-dark ramp, no classes",
          "[report]") {
  pare::ReportData d;
  d.command = "reduce";
  d.title = "t";
  pare::ReportSamples& si = d.sample_info;
  // add_screen carries the target (one per id) into the samples part.
  const pare::FeatureTable table = small_table();
  const pare::SampleScreen screen = pare::screen_samples(table.values, pare::ScreenOptions{});
  std::vector<double> target(60);
  for (std::size_t i = 0; i < 60; ++i) target[i] = static_cast<double>(i);
  pare::add_screen(d, screen, table.sample_ids, {}, "progression", {}, target);
  REQUIRE(si.target == target);
  REQUIRE(si.labels.empty());
  // A hand-made case: 5 samples, target 1, 5, 3, (none), 2.
  si = {};
  si.ids = {"s1", "s2", "s3", "s4", "s5"};
  si.target = {1, 5, 3, std::numeric_limits<double>::quiet_NaN(), 2};
  si.label_name = "progression";
  d.components = {};
  d.components.source = "kept";
  d.components.ratio = {0.5, 0.3};
  d.components.cumulative = {0.5, 0.8};
  d.components.scores = {{1, 2, 3, 4, 5}, {2, 1, 0, -1, 3}};
  const std::string html = pare::report_html(d);
  // Each dot's colour: linear in the value over [1, 5] on the ramp's 7 stops (ColorBrewer Blues
  // 3-9, recalled): 1 -> the first stop, 5 -> the last, 3 -> the middle (4th) stop, 2 -> halfway
  // between the 2nd and 3rd (#9ECAE1, #6BAED6: (158+107)/2 = 132.5 -> 133 = 0x85, (202+174)/2 =
  // 188 = 0xBC, (225+214)/2 = 219.5 -> 220 = 0xDC, rounded half away from zero), no value grey.
  const std::map<std::string, std::string> expected{{"s1", "#C6DBEF"},
                                                    {"s2", "#08306B"},
                                                    {"s3", "#4292C6"},
                                                    {"s4", "#d4d4d4"},
                                                    {"s5", "#85BCDC"}};
  const std::string svg = between(html, "aria-label=\"Samples on PC1 and PC2\"", "</svg>");
  const std::regex dot(
      R"re(fill="(#[0-9A-Fa-f]{6})" fill-opacity="0.8" stroke="#8c8c8c" stroke-width="0.5"><title>([^ ]+) · progression ([^<]*)</title>)re");
  std::map<std::string, std::string> fills, shown;
  for (auto it = std::sregex_iterator(svg.begin(), svg.end(), dot); it != std::sregex_iterator();
       ++it) {
    fills[(*it)[2]] = (*it)[1];
    shown[(*it)[2]] = (*it)[3];
  }
  REQUIRE(fills == expected);
  REQUIRE(shown == std::map<std::string, std::string>{
                       {"s1", "1"}, {"s2", "5"}, {"s3", "3"}, {"s4", "no value"}, {"s5", "2"}});
  // The legend: the ramp's ends with their values, and the samples without a value.
  REQUIRE(html.find("<strong>progression:</strong> low (1) <svg width=\"70\"") !=
          std::string::npos);
  REQUIRE(html.find("</svg> high (5)</li>") != std::string::npos);
  REQUIRE(attribute(html, "<li class=\"ramp\"", "data-lo") == "1");
  REQUIRE(attribute(html, "<li class=\"ramp\"", "data-hi") == "5");
  REQUIRE(html.find("no value (1)</li>") != std::string::npos);
  REQUIRE(html.find("coloured by progression (light: low, dark: high)") != std::string::npos);
  REQUIRE(html.find("5 samples with progression from 1 to 5 (1 without a value)") !=
          std::string::npos);
  const std::string samples = visible_text(between(html, "<section id=\"samples\">", "</section>"));
  REQUIRE(samples.find("class") == std::string::npos);
  // Target-chosen features on their own components: the caution speaks of the target.
  d.chosen_with_labels = true;
  d.ranking.continuous = true;
  d.components.of_kept = true;
  const std::string cautioned = pare::report_html(d);
  REQUIRE(
      cautioned.find(
          "<p class=\"caution\">These features were selected using the target (progression), so "
          "the samples are expected to line up by it") != std::string::npos);
  REQUIRE(cautioned.find("the classes are expected") == std::string::npos);
}

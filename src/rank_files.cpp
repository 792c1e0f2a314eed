// The scan and rank runs written into a folder, and their summaries.
#include <algorithm>   // std::min, std::max
#include <chrono>      // std::chrono::steady_clock
#include <filesystem>  // std::filesystem::path
#include <sstream>     // std::ostringstream

#include "pare/text.h"
#include "pare/error.h"
#include "pare/load.h"
#include "pare/reduce.h"
#include "pare/report.h"
#include "pare/run_files.h"

namespace pare {


namespace {

// The inputs of a run record, as the report lists them: the data, the sheet, the sample list.
void add_inputs(ReportRecord& record, const RunRecord& run) {
  record.version = PARE_VERSION;
  record.command_line = run.command_line;
  record.inputs.push_back({"data", run.input_path, run.input_sha256});
  if (!run.sheet_path.empty())
    record.inputs.push_back({"sample sheet (" + run.sheet_column + ")", run.sheet_path, run.sheet_sha256});
  if (!run.sample_list_path.empty()) record.inputs.push_back({"sample list", run.sample_list_path, run.sample_list_sha256});
}

std::string file_name(const std::string& path) { return std::filesystem::path(path).filename().string(); }

}  // namespace

ScanResult scan_to_folder(const FeatureTable& table, bool log2, const RunRecord& run, const std::string& dir,
                          int threads) {
  ScanResult scan;
  ProfileOptions options;
  options.threads = threads;
  auto lap = std::chrono::steady_clock::now();
  scan.profile = profile_table(table, options);
  const Profile& profile = scan.profile;
  const double profile_seconds = seconds_since(lap);
  // log2 on negative values is an error here as in rank, reduce and project (the screen would
  // otherwise leave such features out without a word).
  if (log2)
    for (std::size_t j = 0; j < profile.features.size(); ++j)
      if (profile.features[j].n > 0 && profile.features[j].min < 0)
        throw Error(ErrorKind::kInput, table.source + ": feature " + table.feature_names[j] + " has negative values (min " +
                                           short_number(profile.features[j].min) +
                                           "), so `log2` cannot apply (leave out `log2`, or transform it yourself)");
  lap = std::chrono::steady_clock::now();
  ScreenOptions screen_options;
  screen_options.log2 = log2;
  screen_options.seed = run.seed;
  screen_options.threads = threads;
  scan.screen = screen_samples(table.values, screen_options, encode_classes(table.labels).codes);
  const double screen_seconds = seconds_since(lap);

  ReportData report;
  report.command = "scan";
  report.title = "pare scan: " + file_name(run.input_path);
  report.samples = table.n_samples();
  report.features = table.n_features();
  report.glance.push_back(thousands(table.n_features()) + " features: " + thousands(profile.n_constant) + " constant, " +
                          thousands(profile.n_near_constant) + " near-constant, " +
                          thousands(profile.n_mostly_missing) + " mostly missing (> " +
                          percent(profile.options.mostly_missing) + "), " + thousands(profile.n_all_missing) +
                          " all missing; scan removes nothing.");
  add_profile(report, table, profile);
  add_screen(report, scan.screen, table.sample_ids, table.labels, table.label_name, {}, table.target);
  if (!run.marks.empty()) {
    report.sample_info.mark_name = run.mark_name;
    report.sample_info.marks = run.marks;
  }
  ReportRecord& record = report.record;
  add_inputs(record, run);
  std::string na;
  for (std::size_t i = 0; i < run.na_tokens.size(); ++i) na += (i ? "," : "") + run.na_tokens[i];
  record.parameters = {{"seed", std::to_string(run.seed)},
                       {"read.layout", layout_name(table.layout)},
                       {"read.delimiter", delimiter_name(table.delimiter)},
                       {"read.label", run.label},
                       {"read.na", na},
                       {"read.allow_inf", run.allow_inf ? "true" : "false"},
                       {"mostly_missing", short_number(profile.options.mostly_missing)},
                       {"sample_missing", short_number(profile.options.sample_missing)},
                       {"near_constant_cv", short_number(profile.options.near_constant_cv)},
                       {"screen.log2", log2 ? "true" : "false"}};
  record.timings = {{"read", run.read_seconds}, {"profile", profile_seconds}, {"sample screen", screen_seconds}};
  record.outputs = {"profile.tsv", "samples.tsv", "report.html"};

  OutputSet files(dir, {run.input_path});
  files.add("profile.tsv", profile_tsv(table, profile));
  files.add("samples.tsv", samples_tsv(scan.screen, table.sample_ids, response_values(table.labels, table.target),
                                       table.label_name, {},
                                       table.sample_info_names, table.sample_info));
  files.add("report.html", report_html(report));
  files.commit();
  return scan;
}

std::string scan_summary(const FeatureTable& t, const ScanResult& scan, const RunRecord& run, const std::string& dir) {
  const Profile& p = scan.profile;
  const auto n = t.n_samples(), m = t.n_features();
  const double cells = static_cast<double>(n) * static_cast<double>(m);
  std::ostringstream out;
  out << "pare scan: " << t.source << "\n";
  out << "  shape      " << thousands(n) << " samples x " << thousands(m) << " features (" << layout_name(t.layout)
      << ", " << delimiter_name(t.delimiter) << "-delimited, read in " << fixed(run.read_seconds, 2) << " s)\n";
  out << "  missing    " << percent(cells > 0 ? static_cast<double>(p.missing_cells) / cells : 0) << " of cells ("
      << thousands(p.missing_cells) << ")";
  out << "; " << thousands(static_cast<std::int64_t>(p.samples_over.size())) << " samples above "
      << percent(p.options.sample_missing) << " missing";
  for (std::size_t k = 0; k < p.samples_over.size() && k < 5; ++k)
    out << (k == 0 ? ": " : ", ") << t.sample_ids[static_cast<std::size_t>(p.samples_over[k])];
  if (p.samples_over.size() > 5) out << ", ...";
  out << "\n";
  out << "  features   " << thousands(p.n_constant) << " constant, " << thousands(p.n_near_constant)
      << " near-constant, " << thousands(p.n_mostly_missing) << " mostly missing (> "
      << percent(p.options.mostly_missing) << "), " << thousands(p.n_all_missing) << " all missing, "
      << thousands(p.n_duplicate_name) << " with a duplicate name\n";
  if (!p.classes.classes.empty()) {
    // A sample without a label has the label "" (left out of supervised steps; counted apart).
    std::int64_t unlabelled = 0, lo = 0, hi = 0, named = 0;
    out << "  classes    " << (t.label_name.empty() ? "label" : t.label_name) << ":";
    for (std::size_t k = 0; k < p.classes.classes.size(); ++k) {
      const std::int64_t count = p.classes.counts[k];
      if (p.classes.classes[k].empty()) {
        unlabelled = count;
        continue;
      }
      out << (named++ == 0 ? " " : ", ") << p.classes.classes[k] << " " << thousands(count);
      lo = lo == 0 ? count : std::min(lo, count);
      hi = std::max(hi, count);
    }
    if (lo > 0) out << " (majority:minority " << fixed(static_cast<double>(hi) / static_cast<double>(lo), 1) << ":1)";
    if (unlabelled > 0) out << "; " << thousands(unlabelled) << " without a label";
    if (named < 2) out << " - fewer than two classes: supervised steps need two";
    out << "\n";
  } else {
    out << "  classes    no labels given (`label` COLUMN or `labels` SHEET.csv)\n";
  }
  out << screen_summary(scan.screen, t.sample_ids, {}, "  outliers   ");
  out << "  wrote      " << join_path(dir, "profile.tsv") << "\n";
  out << "  report     " << join_path(dir, "report.html") << " (per-sample flags in samples.tsv)\n";
  return out.str();
}

void check_rank_options(const RankOptions& o) {
  if (!(o.fdr > 0 && o.fdr <= 1)) throw_usage_error("`fdr` must be in (0, 1]");
  if (o.fdr < 1 && o.criterion == Criterion::kVariance)
    throw_usage_error("`fdr` needs a criterion with a test, and variance has none",
                      "rank by a criterion with a test (mi, chi2, chi2-counts, f; spearman, pearson for a "
                      "target), or leave out `fdr`");
  if (o.keep < 0) throw_usage_error("`keep` must be 0 (all) or more");
  if (o.score.bins < 2) throw_usage_error("`bins` must be 2 or more");
  if (o.score.neighbors < 1) throw_usage_error("`neighbors` must be 1 or more");
}

RankResult rank_to_folder(FeatureTable& table, const RankOptions& options, const RunRecord& run,
                          const std::string& dir, int threads) {
  check_rank_options(options);
  if (table.has_target())
    require_criterion_fits(options.criterion, true);
  else
    require_two_classes(table);
  if (options.log2) log2_transform(table, threads);
  RankResult rank;
  const auto start = std::chrono::steady_clock::now();
  const Criterion criterion = options.criterion;
  ScoreOptions score = options.score;
  score.counts_chi2 = criterion == Criterion::kChi2Counts;
  score.threads = threads;
  const ClassCodes classes = encode_classes(table.labels);
  std::vector<std::int64_t> all(static_cast<std::size_t>(table.n_features()));
  for (std::size_t j = 0; j < all.size(); ++j) all[j] = static_cast<std::int64_t>(j);
  rank.scores = table.has_target() ? score_against_target(table.values, all, table.target, score)
                                   : score_features(table.values, all, classes, score);
  const FeatureScores& scores = rank.scores;
  require_some_scored(scores, criterion, table.source);
  rank.ranked = rank_order(scores, criterion);
  for (std::size_t i : rank.ranked) {
    if (criterion != Criterion::kVariance && criterion_q(scores, criterion, i) > options.fdr) continue;
    ++rank.passing;
    if (options.keep > 0 && static_cast<std::int64_t>(rank.kept.size()) >= options.keep) continue;
    rank.kept.push_back(i);
  }
  rank.seconds = seconds_since(start);
  if (rank.kept.empty())
    throw Error(ErrorKind::kInput, table.source + ": every feature was filtered out: no q-value is at most " +
                                       short_number(options.fdr) + " (raise `fdr`)");

  ReportData report;
  report.command = "rank";
  report.title = "pare rank: " + file_name(run.input_path);
  report.samples = table.n_samples();
  report.features = table.n_features();
  report.glance.push_back("Scored " + thousands(table.n_features()) + " features against " + table.label_name + " (" +
                          (table.has_target() ? std::string("a continuous target")
                                              : std::to_string(classes.classes.size()) + " classes") +
                          ", " + thousands(table.n_samples()) + " samples) on " +
                          (options.log2 ? "log2(x + 1) of the values" : "the values as read") +
                          "; ranked by " + criterion_name(criterion) + ".");
  add_ranking(report, table, scores, rank.ranked, rank.kept, criterion, options.fdr, options.keep);
  std::vector<std::int64_t> top;
  for (std::size_t r = 0; r < rank.kept.size() && r < 6; ++r) top.push_back(scores.feature[rank.kept[r]]);
  add_top_features(report, table, top, options.log2 ? "log2(x + 1) of the observed values" : "observed values");
  ReportRecord& record = report.record;
  add_inputs(record, run);
  record.parameters = {{"transform", options.log2 ? "log2(x + 1)" : "none"},
                       {"rank_by", criterion_name(criterion)},
                       {"fdr", short_number(options.fdr)},
                       {"keep", std::to_string(options.keep)},
                       {"bins", std::to_string(score.bins)},
                       {"mi_estimator", score.mi == MiEstimator::kKnn || table.has_target() ? "knn" : "binned"},
                       {"neighbors", std::to_string(score.neighbors)},
                       {"min_class_size", std::to_string(run.left_out.min_class_size)}};
  if (table.has_target()) std::erase_if(record.parameters, [](const auto& p) {
    return p.first == "bins" || p.first == "min_class_size";
  });
  record.timings = {{"read", run.read_seconds}, {"scoring", rank.seconds}};
  record.outputs = {"ranking.tsv", "report.html"};

  std::vector<std::string> inputs{run.input_path};
  if (!run.sheet_path.empty()) inputs.push_back(run.sheet_path);
  OutputSet files(dir, inputs);
  files.add("ranking.tsv", ranking_tsv(scores, rank.kept, table.feature_names, score.counts_chi2,
                                       table.feature_info_names, table.feature_info));
  files.add("report.html", report_html(report));
  files.commit();
  return rank;
}

std::string rank_summary(const FeatureTable& table, const RankOptions& options, const RankResult& rank,
                         const RunRecord& run, const std::string& dir) {
  const FeatureScores& scores = rank.scores;
  const Criterion criterion = options.criterion;
  const bool counts = criterion == Criterion::kChi2Counts;
  std::ostringstream out;
  out << "pare rank: " << table.source << " - " << thousands(table.n_features()) << " features, "
      << thousands(table.n_samples()) << " samples, "
      << (table.has_target() ? std::string("a continuous target")
                             : std::to_string(encode_classes(table.labels).classes.size()) + " classes")
      << ", ranked by " << criterion_name(criterion) << ", transform " << (options.log2 ? "log2(x + 1)" : "none")
      << "\n";
  out << left_out_summary(run.left_out, run.samples_read, table.n_samples(), run.sample_list_path);
  out << response_line(table);
  std::vector<std::vector<std::string>> rows;
  if (scores.continuous) rows.push_back({"rank", "feature", "pearson_r", "pearson_q", "spearman_rho", "spearman_q", "mi"});
  else rows.push_back({"rank", "feature", "mi", "chi2", "chi2_q", "f", "f_q"});
  if (counts) rows.front().insert(rows.front().end(), {"chi2_counts", "counts_q"});
  for (std::size_t r = 0; r < rank.kept.size() && r < 20; ++r) {
    const std::size_t i = rank.kept[r];
    const std::string& name = table.feature_names[static_cast<std::size_t>(scores.feature[i])];
    std::vector<std::string> row =
        scores.continuous
            ? std::vector<std::string>{std::to_string(r + 1), name, short_number(scores.pearson_r[i]),
                                       short_number(scores.pearson_q[i]), short_number(scores.spearman_rho[i]),
                                       short_number(scores.spearman_q[i]), short_number(scores.mi[i])}
            : std::vector<std::string>{std::to_string(r + 1), name, short_number(scores.mi[i]),
                                       short_number(scores.chi2[i]), short_number(scores.chi2_q[i]),
                                       short_number(scores.f[i]), short_number(scores.f_q[i])};
    if (counts) {
      row.push_back(short_number(scores.chi2_counts[i]));
      row.push_back(short_number(scores.chi2_counts_q[i]));
    }
    rows.push_back(std::move(row));
  }
  out << table_text(rows, 2);
  std::int64_t constant = 0, undefined = 0;
  for (std::size_t i = 0; i < scores.size(); ++i) {
    if (scores.flags[i] & kScoreConstant) ++constant;
    else if (!criterion_defined(scores, criterion, i)) ++undefined;
  }
  const auto kept = static_cast<std::int64_t>(rank.kept.size());
  out << "  kept " << thousands(kept) << " of " << thousands(table.n_features());
  if (options.fdr < 1) out << " (" << thousands(rank.passing) << " with q <= " << short_number(options.fdr) << ")";
  out << "; " << thousands(constant) << " constant (scores 0, p 1)";
  if (undefined > 0) out << ", " << thousands(undefined) << " without a defined " << criterion_name(criterion) << " score";
  out << "\n";
  if (options.keep > 0 && kept < options.keep)
    out << "  note: `keep` " << options.keep << " asked for more than the " << thousands(kept) << " features that pass"
        << (options.fdr < 1 ? " `fdr` " + short_number(options.fdr) : std::string()) << "\n";
  out << "  wrote " << join_path(dir, "ranking.tsv") << ", " << join_path(dir, "report.html") << "\n";
  return out.str();
}

}  // namespace pare

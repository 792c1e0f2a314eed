#include "pare/run_files.h"

#include <algorithm>   // std::min
#include <filesystem>  // std::filesystem::equivalent, std::filesystem::path
#include <future>      // std::async
#include <map>         // std::map
#include <numeric>     // std::iota
#include <sstream>     // std::ostringstream, std::istringstream

#include "internal/format.h"
#include "internal/sha256.h"
#include "pare/text.h"
#include "pare/error.h"
#include "pare/report.h"

namespace pare {


std::string join_path(const std::string& dir, const std::string& name) {
  if (dir.empty() || dir == ".") return name;
  return dir.back() == '/' ? dir + name : dir + "/" + name;
}

OutputSet::OutputSet(std::string dir, std::vector<std::string> inputs) : dir_(std::move(dir)), inputs_(std::move(inputs)) {
  ensure_directory(dir_);
}

void OutputSet::add(const std::string& name, std::string_view content) { open(name).write(content); }

OutputFile& OutputSet::open(const std::string& name) {
  const std::string path = join_path(dir_, name);
  std::error_code ec;
  for (const auto& input : inputs_)
    if (std::filesystem::equivalent(path, input, ec))
      throw_output_error(path, "is the input file " + input, "choose another `out` folder");
  files_.push_back(std::make_unique<OutputFile>(path));
  return *files_.back();
}

void OutputSet::commit() {
  for (auto& f : files_) f->commit();
}

std::string OutputSet::path(const std::string& name) const { return join_path(dir_, name); }

namespace {

std::vector<std::string> input_paths(const RunRecord& run) {
  std::vector<std::string> inputs{run.input_path};
  if (!run.sheet_path.empty()) inputs.push_back(run.sheet_path);
  if (!run.sample_list_path.empty()) inputs.push_back(run.sample_list_path);
  return inputs;
}

// The projection's three files; loadings.tsv is written and hashed piece by piece (p x K numbers
// need not be in memory as text).
PlanProjection write_projection(OutputSet& files, const FeatureTable& table, const PipelineResult& result,
                                const std::vector<std::string>& names) {
  const Projection& pr = *result.projection;
  PlanProjection written;
  files.add("scores.csv", scores_csv(pr.scores, table.sample_ids));
  OutputFile& loadings = files.open(written.loadings_file);
  internal::Sha256 hash;
  write_loadings_tsv(pr.loadings, names, [&](std::string_view piece) {
    loadings.write(piece);
    hash.update(piece);
  });
  files.add("explained.tsv", explained_tsv(pr));
  written.loadings_sha256 = hash.hex();
  return written;
}

std::string report_page(const FeatureTable& table, const PipelineResult& result, const RunRecord& run,
                        const PlanProjection& written, ReportData report) {
  const Reduction& r = result.reduction;
  const bool select = result.options.select;
  report.command = select ? "reduce" : "project";
  report.title = "pare " + report.command + ": " + std::filesystem::path(run.input_path).filename().string();
  report.samples = static_cast<std::int64_t>(result.samples.ids.size());
  report.features = table.n_features();
  add_run_record(report, table, result, run, written);
  add_reduction(report, table, r, result.options.reduce, select);
  if (result.projection) {
    add_components(report, *result.projection,
                   select ? "the " + thousands(static_cast<std::int64_t>(r.kept.size())) + " kept features"
                          : "all " + thousands(table.n_features()) + " features (mean-filled)");
    const std::vector<char>& dropped = result.samples.dropped;
    if (!dropped.empty() && table.n_samples() < static_cast<std::int64_t>(result.samples.ids.size())) {
      for (std::size_t i = 0; i < dropped.size(); ++i)
        if (!dropped[i]) report.components.sample_of.push_back(i);
      report.components.note = "The samples dropped as outliers (--drop-outliers) are not on these plots: the "
                               "components were computed without them.";
    }
  }
  const RunSamples& s = result.samples;
  add_screen(report, result.screen, s.ids, s.labels, s.label_name, s.dropped, s.target);
  if (!run.marks.empty()) {
    report.sample_info.mark_name = run.mark_name;
    report.sample_info.marks = run.marks;
  }
  return report_html(report);
}

// samples.tsv of an apply run: the new samples' ids, labels and --sample-info columns (apply
// screens nothing, so only what was read).
std::string applied_samples_tsv(const FeatureTable& t) {
  std::string out = "sample";
  if (t.has_labels()) out += '\t' + (t.label_name.empty() ? std::string("label") : t.label_name);
  for (const auto& name : t.sample_info_names) out += '\t' + name;
  out += '\n';
  for (std::size_t i = 0; i < t.sample_ids.size(); ++i) {
    out += t.sample_ids[i];
    if (t.has_labels()) out += '\t' + (t.labels[i].empty() ? std::string("NA") : t.labels[i]);
    for (const auto& column : t.sample_info) out += '\t' + column[i];
    out += '\n';
  }
  return out;
}


}  // namespace

ApplyResult apply_to_folder(const Plan& plan, const FeatureTable& data, bool allow_missing, const std::string& dir,
                            std::vector<std::string> inputs, int threads) {
  ApplyResult applied;
  const FeatureTable reduced = apply_plan(plan, data, allow_missing, applied.report, threads);
  const ApplyReport& report = applied.report;
  std::string log = "feature\tstatus\tfilled_cells\n";
  for (std::size_t i = 0; i < plan.names.size(); ++i) {
    const bool absent = std::find(report.absent.begin(), report.absent.end(), plan.names[i]) != report.absent.end();
    log += plan.names[i] + '\t' + (absent ? "absent: filled with the training value" : "present") + '\t' +
           std::to_string(report.filled[i]) + '\n';
  }
  OutputSet files(dir, std::move(inputs));
  applied.reduced_file = reduced_file_name(reduced.delimiter);
  std::vector<std::int64_t> all(plan.names.size());
  for (std::size_t i = 0; i < all.size(); ++i) all[i] = static_cast<std::int64_t>(i);
  files.add(applied.reduced_file, reduced_matrix_text(reduced, all, plan.names));
  files.add("apply-log.tsv", log);
  applied.samples_file = reduced.has_labels() || !reduced.sample_info.empty();
  if (applied.samples_file) files.add("samples.tsv", applied_samples_tsv(reduced));
  if (plan.components > 0)
    files.add("scores.csv",
              scores_csv(project_rows(reduced.values, plan.pca_center, plan.pca_scale, plan.loadings), reduced.sample_ids));
  files.commit();
  return applied;
}

std::string apply_summary(const Plan& plan, const FeatureTable& data, const ApplyResult& applied,
                          const std::string& dir) {
  const ApplyReport& report = applied.report;
  std::int64_t filled = 0;
  for (auto f : report.filled) filled += f;
  const auto present = static_cast<std::int64_t>(plan.names.size() - report.absent.size());
  std::string out = "pare apply: " + data.source + " - " + thousands(data.n_samples()) + " samples, " +
                    thousands(present) + " of the plan's " + thousands(static_cast<std::int64_t>(plan.names.size())) +
                    " features present (" + thousands(report.extra) + " other features ignored)\n";
  out += "  filled " + thousands(filled) + " missing cells with training values";
  if (!report.absent.empty())
    out += "; " + std::to_string(report.absent.size()) + (report.absent.size() == 1 ? " feature" : " features") +
           " absent from the data, filled entirely (see apply-log.tsv)";
  out += "\n  wrote " + join_path(dir, applied.reduced_file) + ", apply-log.tsv";
  if (applied.samples_file) out += ", samples.tsv";
  if (plan.components > 0) out += ", scores.csv (" + std::to_string(plan.components) + " components)";
  return out + "\n";
}

namespace {

// balanced.csv (the reduced matrix's format) and balanced-samples.tsv (sample, label, origin).
PipelineResult::Balanced write_balanced(OutputSet& files, const FeatureTable& t, const Reduction& r,
                                        const std::vector<std::string>& names, const PipelineOptions& options) {
  const BalancedSamples b = balanced_samples(t, r.kept, options.balance_export, options.seed);
  FeatureTable bt;
  bt.values.resize(b.values.rows(), b.values.cols());
  bt.values = b.values;
  bt.sample_ids = b.ids;
  bt.layout = t.layout;
  bt.delimiter = t.delimiter;
  bt.id_name = t.id_name;
  std::vector<std::int64_t> columns(names.size());
  std::iota(columns.begin(), columns.end(), 0);
  PipelineResult::Balanced record;
  record.file = t.delimiter == '\t' ? "balanced.tsv" : "balanced.csv";
  OutputFile& file = files.open(record.file);
  file.write_direct();
  write_reduced_matrix(bt, columns, names, [&](std::string_view piece) { file.write(piece); });
  std::string text = "sample\t" + (t.label_name.empty() ? std::string("label") : t.label_name) + "\torigin\n";
  std::map<std::string, std::int64_t> per_class;
  for (std::size_t i = 0; i < b.ids.size(); ++i) {
    for (const std::string* field : {&b.ids[i], &b.labels[i], &b.origin[i]}) {
      internal::append_field(text, *field, '\t');
      text += field == &b.origin[i] ? '\n' : '\t';
    }
    ++per_class[b.labels[i]];
    record.repeated += b.origin[i].rfind("repeat of ", 0) == 0;
    record.synthetic += b.origin[i].rfind("between ", 0) == 0;
  }
  files.add("balanced-samples.tsv", text);
  record.samples = static_cast<std::int64_t>(b.ids.size());
  record.per_class.assign(per_class.begin(), per_class.end());
  return record;
}

}  // namespace

PipelineResult reduce_to_folder(FeatureTable& table, const PipelineOptions& options, const RunRecord& run,
                                const std::string& dir) {
  OutputSet files(dir, input_paths(run));
  ReportData report;
  std::vector<std::string> names;
  // ranking.tsv and the selection log are text built from names and scores alone, one thread
  // each: they are built alongside the reduced matrix and the PCA, which leave a core idle part
  // of the time, and written after them. Under a memory budget they are built and written one at
  // a time first, so their text (about 400 bytes per feature) is not held while the rest runs.
  const bool bounded = options.memory.bytes > 0;
  // (declared before the text builders, which read it: their futures wait for them on the way out)
  PipelineResult result;
  std::future<std::string> ranking_text, log_text;
  const auto selection_done = [&](const FeatureTable& t, const PipelineResult& so_far) {
    const Reduction& r = so_far.reduction;
    for (const std::int64_t j : r.kept) names.push_back(t.feature_names[static_cast<std::size_t>(j)]);
    if (!options.select) return;
    // The report's strip plots show the leading kept features' values as the reduced matrix holds
    // them, taken now: the PCA may use the table's matrix as its workspace.
    const auto top = std::min<std::ptrdiff_t>(6, std::ssize(r.kept));
    const ReduceOptions& o = so_far.options.reduce;
    add_top_features(report, t, std::span<const std::int64_t>(r.kept.data(), static_cast<std::size_t>(top)),
                     std::string("values as in ") + reduced_file_name(t.delimiter) + " (filled" +
                         (o.log2 ? ", log2(x + 1)" : "") + (o.scale ? ", z-scored" : "") + ")");
    if (bounded) {
      files.add("ranking.tsv", reduction_ranking_tsv(t, r));
      files.add("selection-log.tsv", selection_log_tsv(t, r));
    } else {
      ranking_text = std::async(std::launch::async, [&t, &r] { return reduction_ranking_tsv(t, r); });
      log_text = std::async(std::launch::async, [&t, &r] { return selection_log_tsv(t, r); });
    }
    OutputFile& reduced = files.open(reduced_file_name(t.delimiter));
    reduced.write_direct();
    write_reduced_matrix(t, r.kept, names, [&](std::string_view piece) { reduced.write(piece); });
    if (options.balance_export != BalanceExport::kNone) result.balanced = write_balanced(files, t, r, names, options);
  };
  run_pipeline(table, options, result, run.read_seconds, selection_done);
  PlanProjection written;
  if (result.reduction.knn) {
    OutputFile& file = files.open(written.impute_reference_file);
    file.write_direct();
    internal::Sha256 hash;
    write_knn_reference_npy(*result.reduction.knn, [&](std::string_view piece) {
      hash.update(piece);
      file.write(piece);
    });
    written.impute_reference_sha256 = hash.hex();
  }
  if (result.projection) written = write_projection(files, table, result, names);
  if (ranking_text.valid()) files.add("ranking.tsv", ranking_text.get());
  if (log_text.valid()) files.add("selection-log.tsv", log_text.get());
  files.add("plan.json", plan_json(table, result, run, written));
  const RunSamples& s = result.samples;
  files.add("samples.tsv",
            samples_tsv(result.screen, s.ids, response_values(s.labels, s.target), s.label_name, s.dropped, s.info_names, s.info));
  files.add("report.html", report_page(table, result, run, written, std::move(report)));
  files.commit();
  return result;
}

std::string class_counts_text(const FeatureTable& table) {
  const ClassCodes codes = encode_classes(table.labels);
  std::string text = (table.label_name.empty() ? std::string("label") : table.label_name) + " -";
  for (std::size_t c = 0; c < codes.classes.size() && c < 12; ++c)
    text += (c ? ", " : " ") + codes.classes[c] + " " + thousands(codes.counts[c]);
  if (codes.classes.size() > 12) text += ", ... (" + thousands(static_cast<std::int64_t>(codes.classes.size())) + " classes)";
  return text;
}

std::string target_text(const FeatureTable& table) {
  std::vector<double> sorted = table.target;
  std::sort(sorted.begin(), sorted.end());
  const std::size_t n = sorted.size();
  const double median = n == 0 ? 0.0 : n % 2 ? sorted[n / 2] : (sorted[n / 2 - 1] + sorted[n / 2]) / 2;
  return (table.label_name.empty() ? std::string("target") : table.label_name) + " - " +
         thousands(static_cast<std::int64_t>(n)) + " values from " + short_number(n ? sorted.front() : 0.0) + " to " +
         short_number(n ? sorted.back() : 0.0) + ", median " + short_number(median);
}

std::string response_line(const FeatureTable& table) {
  if (table.has_target()) return "  target: " + target_text(table) + "\n";
  if (table.has_labels()) return "  classes: " + class_counts_text(table) + "\n";
  return "";
}

std::string stability_text(const StabilityRecord& st, std::int64_t kept) {
  const StabilityOptions& o = st.options;
  const std::string samples = st.subset_samples_min == st.subset_samples_max
                                  ? thousands(st.subset_samples_min)
                                  : thousands(st.subset_samples_min) + "-" + thousands(st.subset_samples_max);
  std::string bound;
  internal::append_rounded(bound, st.bound, 3);
  return "stability: " + thousands(o.resamples) + " subsets of " + samples + " samples (" +
         resample_scheme_name(o.scheme) + "), each keeping " + thousands(st.q) + "; " + thousands(st.selected) +
         (st.selected == 1 ? " feature" : " features") + " kept in at least " + percent(o.min_stability) + " of them, " + thousands(kept) +
         " after pruning on all samples\nexpected false selections among them at most " + bound +
         " (q^2 / ((2 PI - 1) p) with q " + thousands(st.q) + ", PI " + short_number(o.min_stability) + ", p " +
         thousands(st.p) + " features ranked; Meinshausen & Buhlmann 2010)\n" +
         (st.bound >= static_cast<double>(std::max<std::int64_t>(kept, 1))
              ? "note: the bound is not below the number selected, so it rules out nothing here (lower `keep` "
                "or raise `min_stability`)\n"
              : "");
}

std::string left_out_summary(const SamplesLeftOut& left, std::int64_t samples_read, std::int64_t samples_used,
                             const std::string& sample_list, double subsample) {
  if (left.empty() && samples_used == samples_read) return "";
  std::string out = "  samples: " + thousands(samples_used) + " of " + thousands(samples_read) + " used";
  std::string why;
  const auto listed = samples_used + static_cast<std::int64_t>(left.unlabelled.size() + left.small_class.size());
  if (!sample_list.empty()) why += thousands(listed) + " listed in " + sample_list;
  if (!left.unlabelled.empty())
    why += (why.empty() ? "" : "; ") + thousands(static_cast<std::int64_t>(left.unlabelled.size())) +
           (left.target ? " without a target value left out" : " without a label left out");
  if (!left.small_class.empty()) {
    why += (why.empty() ? "" : "; ") + thousands(static_cast<std::int64_t>(left.small_class.size())) +
           " in classes under `min_class_size` " + std::to_string(left.min_class_size) + " left out (";
    for (std::size_t k = 0; k < left.small_classes.size(); ++k) why += (k ? ", " : "") + left.small_classes[k];
    why += ")";
  }
  if (subsample > 0)
    why += (why.empty() ? "" : "; then ") + std::string("a stratified random subset, `subsample` ") +
           short_number(subsample);
  return out + (why.empty() ? "" : " (" + why + "; plan.json lists the ids left out)") + "\n";
}

std::string screen_summary(const SampleScreen& screen, const std::vector<std::string>& ids,
                           const std::vector<char>& dropped, const std::string& label) {
  const auto n = static_cast<std::int64_t>(ids.size());
  if (!screen.done) return label + "not screened for outliers: " + screen.reason + "\n";
  const std::vector<std::int64_t> flagged = screen.flagged();
  std::string out = label + (flagged.empty() ? "none" : thousands(static_cast<std::int64_t>(flagged.size()))) +
                    " of " + thousands(n) + " samples flagged as outliers (robust distance > " +
                    short_number(screen.robust.threshold) + " on " + std::to_string(screen.scores.cols()) +
                    " screening components)";
  if (flagged.empty()) return out + "\n";
  bool any_dropped = false;
  for (const char d : dropped) any_dropped = any_dropped || d;
  out += any_dropped ? " and dropped before the reduction: " : ": ";
  for (std::size_t k = 0; k < flagged.size() && k < 20; ++k)
    out += (k ? ", " : "") + ids[static_cast<std::size_t>(flagged[k])];
  if (flagged.size() > 20) out += ", ... (samples.tsv lists all)";
  return out + (any_dropped ? "\n" : "; kept (`drop_outliers` removes them)\n");
}

std::string reduce_summary(const FeatureTable& table, const PipelineResult& result, const RunRecord& run,
                           const std::string& dir) {
  const Reduction& r = result.reduction;
  const ReduceOptions& o = result.options.reduce;
  const bool select = result.options.select;
  std::ostringstream out;
  out << "pare " << (select ? "reduce" : "project") << ": " << table.source << " - " << thousands(table.n_samples())
      << " samples x " << thousands(table.n_features()) << " features";
  if (select)
    out << " -> " << thousands(static_cast<std::int64_t>(r.kept.size())) << " kept, ranked by "
        << criterion_name(r.criterion);
  out << "\n";
  out << left_out_summary(run.left_out, run.samples_read, static_cast<std::int64_t>(result.samples.ids.size()),
                          run.sample_list_path, run.subsample);
  if (r.supervised) out << response_line(table);
  if (!r.scored_rows.empty())
    out << "  balanced: scored on " << thousands(static_cast<std::int64_t>(r.scored_rows.size()))
        << " samples, every class down-sampled to the smallest (`balance` smallest)\n";
  std::vector<std::vector<std::string>> rows{{"step", "in", "out", "seconds"}};
  for (const auto& s : r.steps) {
    // Without selection only reading, filling and the PCA are shown.
    if (!select && s.step != Step::kRead && s.step != Step::kImpute && s.step != Step::kProject) continue;
    rows.push_back({step_name(s.step), thousands(s.in), thousands(s.out), fixed(s.seconds, 2)});
  }
  out << table_text(rows, 1);
  if (r.stability) {
    std::istringstream lines(stability_text(*r.stability, static_cast<std::int64_t>(r.kept.size())));
    for (std::string line; std::getline(lines, line);) out << "  " << line << "\n";
  }
  if (select && !r.stability && o.keep > 0 && static_cast<std::int64_t>(r.kept.size()) < o.keep)
    out << "  note: kept " << thousands(static_cast<std::int64_t>(r.kept.size())) << ", fewer than `keep` " << o.keep
        << ": only so many features "
        << (r.supervised && o.fdr < 1 ? "passed `fdr` " + short_number(o.fdr) + " and " : std::string())
        << "survived the filters and pruning\n";
  if (select) {
    out << "  top:";
    for (std::size_t k = 0; k < r.kept.size() && k < 10; ++k)
      out << (k ? ", " : " ") << table.feature_names[static_cast<std::size_t>(r.kept[k])];
    out << (r.kept.size() > 10 ? ", ...\n" : "\n");
  }
  if (result.projection) {
    const Projection& pr = *result.projection;
    out << "  PCA: " << pr.singular_values.size() << " components (" << pr.method << ", " << pr.precision
        << " products";
    if (pr.iterations > 0) out << ", " << pr.iterations << " blocks, residual " << short_number(pr.residual);
    out << "), explained variance";
    for (Eigen::Index c = 0; c < pr.ratio.size() && c < 5; ++c) out << (c ? ", " : " ") << percent(pr.ratio(c));
    out << (pr.ratio.size() > 5 ? ", ..." : "") << " (cumulative " << percent(pr.cumulative(pr.cumulative.size() - 1))
        << ")\n";
  }
  out << screen_summary(result.screen, result.samples.ids, result.samples.dropped);
  out << "  wrote " << join_path(dir, "plan.json");
  if (select) out << ", ranking.tsv, selection-log.tsv, " << reduced_file_name(table.delimiter);
  if (result.projection) out << ", scores.csv, loadings.tsv, explained.tsv";
  if (r.knn) out << ", impute-reference.npy";
  out << ", samples.tsv, report.html";
  if (result.balanced) {
    const PipelineResult::Balanced& b = *result.balanced;
    out << "\n  wrote " << join_path(dir, b.file) << " for training (" << balance_export_name(result.options.balance_export) << "): "
        << thousands(b.samples) << " samples,";
    for (std::size_t c = 0; c < b.per_class.size(); ++c)
      out << (c ? ", " : " ") << b.per_class[c].first << " " << thousands(b.per_class[c].second);
    if (b.repeated > 0) out << "; " << thousands(b.repeated) << " repeats";
    if (b.synthetic > 0) out << "; " << thousands(b.synthetic) << " synthetic";
    out << " (balanced-samples.tsv says which); never use it to test a model";
  }
  out << "\n";
  return out.str();
}

}  // namespace pare

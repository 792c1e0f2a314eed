#include "pare/folds.h"

#include <signal.h>
#include <unistd.h>

#include <algorithm>      // std::stable_sort, std::sort, std::min_element
#include <cerrno>         // errno
#include <cstdlib>        // std::strtol
#include <filesystem>     // std::filesystem::rename, remove_all
#include <map>            // std::map
#include <numeric>        // std::iota
#include <sstream>        // std::ostringstream
#include <unordered_map>  // std::unordered_map

#include "internal/columns.h"
#include "internal/format.h"
#include "internal/random.h"
#include "internal/sha256.h"
#include "internal/text_fields.h"
#include "pare/error.h"
#include "pare/plan.h"
#include "pare/run_files.h"
#include "pare/samples.h"
#include "pare/text.h"

namespace pare {

namespace {

namespace fs = std::filesystem;
using internal::in_quotes;

// Each repeat deals from a stream of the run's seed of its own (streams 0x464f0001, 0x464f0002,
// ...: "FO" and the repeat, apart from the streams the projection and the demo use).
constexpr std::uint64_t kFoldStream = 0x464f0000;

using internal::shuffle;

std::string split_name(std::int64_t repeat, std::int64_t fold) {
  return "r" + std::to_string(repeat) + "-f" + std::to_string(fold);
}

// Within each class (name order) the samples are shuffled and dealt round robin; the dealing goes
// on across classes from a random first fold, so a fold never collects every class's extra sample.
void deal_by_class(const FeatureTable& table, std::int64_t k, internal::Rng& rng, std::vector<std::int32_t>& fold) {
  const ClassCodes codes = encode_classes(table.labels);
  std::vector<std::vector<std::int64_t>> members(codes.classes.size());
  for (std::size_t i = 0; i < codes.codes.size(); ++i)
    members[static_cast<std::size_t>(codes.codes[i])].push_back(static_cast<std::int64_t>(i));
  auto next = static_cast<std::int64_t>(rng.below(static_cast<std::uint64_t>(k)));
  for (auto& m : members) {
    shuffle(m, rng);
    for (const std::int64_t i : m) {
      fold[static_cast<std::size_t>(i)] = static_cast<std::int32_t>(next);
      next = (next + 1) % k;
    }
  }
}

// The samples sorted by target (ties in table order) and dealt in consecutive blocks of K, each
// block to the folds in a shuffled order (a last, shorter block to as many shuffled folds), so
// every fold spans the target's range.
void deal_by_target(const FeatureTable& table, std::int64_t k, internal::Rng& rng, std::vector<std::int32_t>& fold) {
  std::vector<std::int64_t> order(table.target.size());
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](std::int64_t a, std::int64_t b) {
    return table.target[static_cast<std::size_t>(a)] < table.target[static_cast<std::size_t>(b)];
  });
  std::vector<std::int32_t> folds(static_cast<std::size_t>(k));
  for (std::size_t start = 0; start < order.size(); start += static_cast<std::size_t>(k)) {
    std::iota(folds.begin(), folds.end(), 0);
    shuffle(folds, rng);
    for (std::size_t b = 0; b < folds.size() && start + b < order.size(); ++b)
      fold[static_cast<std::size_t>(order[start + b])] = folds[b];
  }
}

// Whole groups to one fold: groups in a shuffled order, then (stably) largest first, each to the
// fold with the fewest samples so far, the lower fold on a tie.
void deal_by_group(const std::vector<std::string>& groups, std::int64_t k, internal::Rng& rng,
                   std::vector<std::int32_t>& fold) {
  std::unordered_map<std::string_view, std::size_t> index;
  std::vector<std::vector<std::int64_t>> members;
  for (std::size_t i = 0; i < groups.size(); ++i) {
    const auto [it, fresh] = index.emplace(groups[i], members.size());
    if (fresh) members.emplace_back();
    members[it->second].push_back(static_cast<std::int64_t>(i));
  }
  shuffle(members, rng);
  std::stable_sort(members.begin(), members.end(),
                   [](const auto& a, const auto& b) { return a.size() > b.size(); });
  std::vector<std::int64_t> size(static_cast<std::size_t>(k), 0);
  for (const auto& m : members) {
    const auto smallest = static_cast<std::size_t>(std::min_element(size.begin(), size.end()) - size.begin());
    for (const std::int64_t i : m) fold[static_cast<std::size_t>(i)] = static_cast<std::int32_t>(smallest);
    size[smallest] += static_cast<std::int64_t>(m.size());
  }
}

std::int64_t distinct(const std::vector<std::string>& values) {
  std::unordered_map<std::string_view, char> seen;
  for (const auto& v : values) seen.emplace(v, 1);
  return static_cast<std::int64_t>(seen.size());
}

// The rows `rows` (ascending) of `all` as a table of their own, allocated under `budget`; `all`
// is left as it is (keep_samples moves from the table it shrinks).
FeatureTable rows_of(const FeatureTable& all, const std::vector<std::int64_t>& rows, const MemoryBudget& budget) {
  FeatureTable t;
  const auto n = static_cast<Eigen::Index>(rows.size());
  t.values.allocate(n, all.n_features(), budget);
  const bool on_disk = all.values.on_disk() || t.values.on_disk();
  for (Eigen::Index j = 0; j < all.n_features(); ++j) {
    const float* from = all.values.col(j).data();
    float* to = t.values.col(j).data();
    for (Eigen::Index k = 0; k < n; ++k) to[k] = from[rows[static_cast<std::size_t>(k)]];
    if (on_disk) {
      internal::release_column_span(all.values, j, j);
      internal::release_column_span(t.values, j, j);
    }
  }
  const auto pick = [&](const std::vector<std::string>& v) {
    std::vector<std::string> out;
    if (v.empty()) return out;
    out.reserve(rows.size());
    for (const std::int64_t i : rows) out.push_back(v[static_cast<std::size_t>(i)]);
    return out;
  };
  t.feature_names = all.feature_names;
  t.sample_ids = pick(all.sample_ids);
  t.labels = pick(all.labels);
  for (const std::int64_t i : rows)
    if (!all.target.empty()) t.target.push_back(all.target[static_cast<std::size_t>(i)]);
  t.label_name = all.label_name;
  t.id_name = all.id_name;
  t.source = all.source;
  t.labels_source = all.labels_source;
  t.delimiter = all.delimiter;
  t.layout = all.layout;
  t.feature_info_names = all.feature_info_names;
  t.feature_info = all.feature_info;
  t.sample_info_names = all.sample_info_names;
  for (const auto& column : all.sample_info) t.sample_info.push_back(pick(column));
  t.renamed = all.renamed;
  return t;
}

// A split's training table as `reduce --samples LIST` would use it: restricted to the list, then
// (supervised) the samples of classes under min_class_size left out, with what a reduce run
// would check of the response.
void leave_out_for_split(const DataRequest& request, LoadedData& split, const std::string& name,
                         const std::vector<std::pair<std::string, std::int64_t>>& rare_overall) {
  FeatureTable& t = split.table;
  const std::string& source = t.labels_source.empty() ? t.source : t.labels_source;
  if (t.has_target()) {
    split.left_out.target = true;
    const std::string column = t.label_name.empty() ? std::string("target") : t.label_name;
    if (t.target.size() < 3)
      throw_input_error({source}, "the target " + in_quotes(column) + " has " + std::to_string(t.target.size()) +
                                      " training samples in split " + name + "; scoring needs at least 3",
                        "use fewer `folds`");
    if (std::all_of(t.target.begin(), t.target.end(), [&](double v) { return v == t.target.front(); }))
      throw_input_error({source}, "the target " + in_quotes(column) + " has one value in every training sample of split " +
                                      name + "; scoring against it means nothing");
    return;
  }
  if (!request.supervised || !t.has_labels()) return;
  split.left_out = leave_out_samples(t, request.min_class_size, request.read.memory);
  const SamplesLeftOut& out = split.left_out;
  if (!out.small_class.empty()) {
    std::string classes;
    for (const auto& c : out.small_classes) classes += (classes.empty() ? "" : ", ") + c;
    split.warnings.push_back(name + ": " + std::to_string(out.small_class.size()) +
                             " training samples of classes under `min_class_size` " +
                             std::to_string(request.min_class_size) + " left out: " + classes);
  }
  if (t.n_samples() == 0)
    throw_input_error({source}, "split " + name + " is left without a training sample",
                      "check `min_class_size` and use fewer `folds`");
  for (const auto& rare : rare_classes(t, 3)) {
    const std::string& cls = rare.first;
    const std::int64_t count = rare.second;
    const bool known = std::any_of(rare_overall.begin(), rare_overall.end(),
                                   [&](const auto& r) { return r.first == cls; });
    if (!known)
      split.warnings.push_back(name + ": class " + cls + " has " + std::to_string(count) +
                               " training sample" + (count == 1 ? "" : "s") + ": its scores say little");
  }
}

// A split's folder is written under a hidden name and moved into place at the end of the run:
// ".rR-fF.part-PID". Those of runs that were killed (their process is gone) are removed.
void remove_stale_splits(const std::string& dir) {
  std::error_code ec;
  for (fs::directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec)) {
    const std::string name = it->path().filename().string();
    const auto part = name.find(".part-");
    if (name.rfind(".r", 0) != 0 || part == std::string::npos) continue;
    const char* digits = name.c_str() + part + 6;
    char* stop = nullptr;
    const long pid = std::strtol(digits, &stop, 10);
    if (stop == digits || *stop != '\0' || pid <= 0) continue;
    if (::kill(static_cast<pid_t>(pid), 0) == 0 || errno != ESRCH) continue;
    std::error_code ignored;
    fs::remove_all(it->path(), ignored);
  }
}

// The hidden folders of this run: removed unless moved into place.
struct StagedSplits {
  std::vector<std::pair<std::string, std::string>> folders;  // (hidden, final)
  ~StagedSplits() {
    std::error_code ignored;
    for (const auto& [hidden, final_path] : folders) fs::remove_all(hidden, ignored);
  }
  void move_into_place() {
    const std::string old_suffix = ".old-" + std::to_string(::getpid());
    for (auto& [hidden, final_path] : folders) {
      std::error_code ec;
      // A split folder of an earlier run is replaced whole, never mixed with this one's files.
      std::string old_name(1, '.');  // (not "." + name: g++ 12 warns falsely on that)
      old_name += fs::path(final_path).filename().string();
      old_name += old_suffix;
      const std::string old = (fs::path(final_path).parent_path() / old_name).string();
      if (fs::exists(final_path, ec)) {
        fs::rename(final_path, old, ec);
        if (ec) throw_output_error(final_path, "cannot replace the folder of an earlier run: " + ec.message(),
                                   "remove it, or choose another `out` folder");
      }
      fs::rename(hidden, final_path, ec);
      if (ec) throw_output_error(final_path, "cannot move the split's folder into place: " + ec.message(),
                                 "check that the `out` folder is writable");
      fs::remove_all(old, ec);
      hidden.clear();
    }
    folders.clear();
  }
};

}  // namespace

void check_fold_options(const FoldOptions& options) {
  if (options.folds < 2)
    throw_usage_error("`folds` " + std::to_string(options.folds) + " is below 2",
                      "K-fold splitting needs at least 2 folds; 5 or 10 are usual");
  if (options.repeats < 1) throw_usage_error("`repeats` must be 1 or more");
}

FoldAssignment assign_folds(const FeatureTable& table, const FoldOptions& options, std::uint64_t seed,
                            const std::vector<std::string>& groups) {
  check_fold_options(options);
  const std::int64_t n = table.n_samples(), k = options.folds;
  const bool grouped = !groups.empty();
  if (grouped && static_cast<std::int64_t>(groups.size()) != n)
    throw Error(ErrorKind::kOther, "assign_folds: one group per sample expected");
  if (grouped)
    for (std::size_t i = 0; i < groups.size(); ++i)
      if (groups[i].empty())
        throw_input_error({table.labels_source.empty() ? table.source : table.labels_source},
                          "sample " + in_quotes(table.sample_ids[i]) + " has no value in the `groups` column",
                          "every sample needs a group: fill it in, or leave the sample out with `samples`");
  const std::int64_t units = grouped ? distinct(groups) : n;
  if (k > units)
    throw_input_error({table.source}, "`folds` " + std::to_string(k) + " is more than the " + std::to_string(units) +
                                          (grouped ? " groups" : " samples") + " to deal",
                      std::string("ask for at most ") + std::to_string(units) + " folds");
  FoldAssignment a;
  a.folds = k;
  a.repeats = options.repeats;
  a.scheme = grouped ? "by group" : table.has_target() ? "dealt by target" : table.has_labels() ? "stratified by class"
                                                                                                : "random";
  for (std::int64_t r = 0; r < options.repeats; ++r) {
    internal::Rng rng(seed, kFoldStream + static_cast<std::uint64_t>(r) + 1);
    std::vector<std::int32_t> fold(static_cast<std::size_t>(n), 0);
    if (grouped) {
      deal_by_group(groups, k, rng, fold);
    } else if (table.has_target()) {
      deal_by_target(table, k, rng, fold);
    } else {
      if (table.has_labels()) {
        deal_by_class(table, k, rng, fold);
      } else {  // no response: one shuffled round
        std::vector<std::int64_t> order(static_cast<std::size_t>(n));
        std::iota(order.begin(), order.end(), 0);
        shuffle(order, rng);
        for (std::size_t i = 0; i < order.size(); ++i)
          fold[static_cast<std::size_t>(order[i])] = static_cast<std::int32_t>(static_cast<std::int64_t>(i) % k);
      }
    }
    a.fold.push_back(std::move(fold));
  }
  return a;
}

void check_group_column(const DataRequest& request, const std::string& column) {
  const auto& info = request.read.sample_info;
  if (std::find(info.begin(), info.end(), column) != info.end()) return;
  if (request.labels.empty())
    throw_usage_error("`groups` " + column + " needs a sample sheet with that column or, with rows=samples, the "
                      "column as `sample_info` " + column);
  const SampleSheet sheet = read_sample_sheet(request.labels);
  if (std::find(sheet.header.begin(), sheet.header.end(), column) == sheet.header.end())
    throw_input_error({sheet.path, 1}, "the sample sheet has no column " + in_quotes(column) + " for `groups`",
                      "name a column of the sheet, or with rows=samples a `sample_info` column of the data");
}

std::vector<std::string> sample_groups(const DataRequest& request, const LoadedData& loaded, const std::string& column) {
  const FeatureTable& t = loaded.table;
  std::vector<std::string> values;
  Location where{t.source};
  SampleSheet sheet;
  const auto info = std::find(t.sample_info_names.begin(), t.sample_info_names.end(), column);
  if (info != t.sample_info_names.end()) {
    values = t.sample_info[static_cast<std::size_t>(info - t.sample_info_names.begin())];
    const internal::NaTokens na(request.read.na_tokens);
    for (auto& v : values)
      if (na.contains(v)) v.clear();
  } else if (!request.labels.empty()) {
    check_group_column(request, column);
    sheet = read_sample_sheet(request.labels);
    values = sheet_column_values(sheet, column, t.sample_ids);
    where.file = sheet.path;
  } else {
    check_group_column(request, column);  // throws: neither a sample-info column nor a sheet
  }
  for (std::size_t i = 0; i < values.size(); ++i) {
    if (!values[i].empty()) continue;
    for (std::size_t k = 0; k < sheet.ids.size(); ++k)
      if (sheet.ids[k] == t.sample_ids[i]) where.line = sheet.lines[k];
    throw_input_error(where,
                      "sample " + in_quotes(t.sample_ids[i]) + " has no value in " + in_quotes(column) +
                          ", the `groups` column",
                      "every sample needs a group: fill it in, or leave the sample out with `samples`");
  }
  return values;
}

std::string folds_tsv(const std::vector<std::string>& sample_ids, const FoldAssignment& a) {
  std::string out = "sample\trepeat\tfold\n";
  for (std::size_t r = 0; r < a.fold.size(); ++r)
    for (std::size_t i = 0; i < sample_ids.size(); ++i) {
      internal::append_field(out, sample_ids[i], '\t');
      out += '\t' + std::to_string(r + 1) + '\t' + std::to_string(a.fold[r][i] + 1) + '\n';
    }
  return out;
}

std::string kept_across_tsv(const std::vector<KeptAcross>& across, std::int64_t splits) {
  std::string out = "feature\tkept_in\tsplits\tfraction\tmean_rank\n";
  for (const auto& f : across) {
    internal::append_field(out, f.feature, '\t');
    out += '\t' + std::to_string(f.kept_in) + '\t' + std::to_string(splits) + '\t';
    internal::append_number(out, static_cast<double>(f.kept_in) / static_cast<double>(splits));
    out += '\t';
    internal::append_number(out, f.mean_rank);
    out += '\n';
  }
  return out;
}

FoldsResult folds_to_folder(const DataRequest& request, const LoadedData& loaded, const PipelineOptions& options,
                            const FoldOptions& folds, const std::vector<std::string>& command_line,
                            const std::string& dir) {
  const FeatureTable& all = loaded.table;
  if (!all.has_labels() && !all.has_target())
    throw_usage_error("folds needs class labels or a target to stratify by and to select against",
                      "give `label`, `labels`, `target` or `targets`");
  FoldsResult result;
  std::vector<std::string> groups;
  if (!folds.groups.empty()) {
    groups = sample_groups(request, loaded, folds.groups);
    result.groups = folds.groups;
    result.group_count = distinct(groups);
  }
  result.assignment = assign_folds(all, folds, options.seed, groups);
  const FoldAssignment& a = result.assignment;
  ensure_directory(dir);
  remove_stale_splits(dir);
  const auto rare_overall = rare_classes(all, 3);
  const std::int64_t p = all.n_features();
  std::vector<std::int64_t> kept_in(static_cast<std::size_t>(p), 0), rank_sum(static_cast<std::size_t>(p), 0);
  StagedSplits staged;
  for (std::int64_t r = 1; r <= a.repeats; ++r)
    for (std::int64_t f = 1; f <= a.folds; ++f) {
      const std::vector<std::int32_t>& fold = a.fold[static_cast<std::size_t>(r - 1)];
      FoldSplit split;
      split.repeat = r;
      split.fold = f;
      split.name = split_name(r, f);
      const std::string final_dir = join_path(dir, split.name);
      const std::string hidden = join_path(dir, "." + split.name + ".part-" + std::to_string(::getpid()));
      staged.folders.emplace_back(hidden, final_dir);
      std::vector<std::int64_t> training, held_out;
      for (std::size_t i = 0; i < fold.size(); ++i)
        (fold[i] == f - 1 ? held_out : training).push_back(static_cast<std::int64_t>(i));
      split.training = static_cast<std::int64_t>(training.size());
      split.held_out = static_cast<std::int64_t>(held_out.size());
      // The training samples as a sample list: the plan records it (path and SHA-256) as `reduce
      // --samples` does, and `reduce --samples DIR/rR-fF/training-samples.txt` repeats the split.
      std::string list;
      for (const std::int64_t i : training) list += all.sample_ids[static_cast<std::size_t>(i)] + '\n';
      try {
        {
          DataRequest split_request = request;
          split_request.samples = join_path(final_dir, "training-samples.txt");
          LoadedData part;
          part.table = rows_of(all, training, request.read.memory);
          part.samples_read = loaded.samples_read;
          part.data_sha256 = loaded.data_sha256;
          part.sheet_sha256 = loaded.sheet_sha256;
          part.sheet_path = loaded.sheet_path;
          part.sample_list_sha256 = internal::sha256_hex(list);
          leave_out_for_split(request, part, split.name, rare_overall);
          if (!loaded.marks.empty()) {
            std::unordered_map<std::string_view, std::size_t> row;
            for (std::size_t i = 0; i < all.sample_ids.size(); ++i) row.emplace(all.sample_ids[i], i);
            for (const auto& id : part.table.sample_ids) part.marks.push_back(loaded.marks[row.at(id)]);
          }
          RunRecord record = run_record(split_request, part, command_line, options.seed);
          record.split = SplitRecord{r,        f, a.folds, a.repeats, a.scheme, folds.groups, split.held_out,
                                     "training-samples.txt"};
          ensure_directory(hidden);
          write_file_atomically(join_path(hidden, "training-samples.txt"), list);
          const PipelineResult reduced = reduce_to_folder(part.table, options, record, hidden);
          split.used = static_cast<std::int64_t>(reduced.samples.ids.size());
          const Reduction& red = reduced.reduction;
          for (std::size_t k = 0; k < red.kept.size(); ++k) {
            const auto j = static_cast<std::size_t>(red.kept[k]);
            split.kept.push_back(all.feature_names[j]);
            ++kept_in[j];
            rank_sum[j] += static_cast<std::int64_t>(k + 1);
          }
          split.warnings = std::move(part.warnings);
        }  // the training rows are freed here
        const Plan plan = load_plan(join_path(hidden, "plan.json"));
        FeatureTable held = rows_of(all, held_out, request.read.memory);
        // apply carries labels to samples.tsv; a target is carried as its text.
        if (held.has_target()) {
          held.labels = response_values({}, held.target);
          held.target.clear();
        }
        (void)apply_to_folder(plan, held, false, join_path(hidden, "held-out"), {request.path, plan.path},
                              options.threads);
      } catch (const Error& e) {
        throw Error(e.kind(), std::string(e.what()) + " [in split " + split.name + "]");
      }
      result.splits.push_back(std::move(split));
    }
  for (std::int64_t j = 0; j < p; ++j) {
    const auto u = static_cast<std::size_t>(j);
    if (kept_in[u] > 0)
      result.across.push_back({all.feature_names[u], j, kept_in[u],
                               static_cast<double>(rank_sum[u]) / static_cast<double>(kept_in[u])});
  }
  std::stable_sort(result.across.begin(), result.across.end(), [](const KeptAcross& x, const KeptAcross& y) {
    if (x.kept_in != y.kept_in) return x.kept_in > y.kept_in;
    return x.mean_rank < y.mean_rank;
  });
  std::vector<std::string> inputs{request.path};
  if (!loaded.sheet_path.empty()) inputs.push_back(loaded.sheet_path);
  OutputSet files(dir, inputs);
  files.add("folds.tsv", folds_tsv(all.sample_ids, a));
  files.add("kept-across-folds.tsv",
            kept_across_tsv(result.across, static_cast<std::int64_t>(result.splits.size())));
  staged.move_into_place();
  files.commit();
  return result;
}

std::string folds_summary(const LoadedData& loaded, const FoldsResult& result, const std::string& dir) {
  const FeatureTable& t = loaded.table;
  const FoldAssignment& a = result.assignment;
  std::ostringstream out;
  out << "pare folds: " << t.source << " - " << thousands(t.n_samples()) << " samples x " << thousands(t.n_features())
      << " features, " << a.folds << " folds x " << a.repeats << (a.repeats == 1 ? " repeat" : " repeats") << ", "
      << a.scheme;
  if (!result.groups.empty()) out << " (" << thousands(result.group_count) << " groups in " << result.groups << ")";
  out << "\n";
  out << left_out_summary(loaded.left_out, loaded.samples_read, t.n_samples(), {});
  out << response_line(t);
  std::vector<std::vector<std::string>> rows{{"split", "training", "held out", "kept"}};
  std::vector<std::string> tops{"top"};
  for (const auto& s : result.splits) {
    std::string top;
    for (std::size_t k = 0; k < s.kept.size() && k < 5; ++k) top += (k ? ", " : "") + s.kept[k];
    if (s.kept.size() > 5) top += ", ...";
    rows.push_back({s.name, thousands(s.used), thousands(s.held_out), thousands(static_cast<std::int64_t>(s.kept.size()))});
    tops.push_back(top);
  }
  // The top features, left-aligned, after the numbers.
  std::istringstream table(table_text(rows, 1));
  std::string line;
  for (std::size_t k = 0; std::getline(table, line); ++k) out << line << "  " << (k < tops.size() ? tops[k] : "") << "\n";
  const auto splits = static_cast<std::int64_t>(result.splits.size());
  out << "  kept across the " << splits << " splits (" << thousands(static_cast<std::int64_t>(result.across.size()))
      << " features kept at least once), top 10:\n";
  std::vector<std::vector<std::string>> top{{"feature", "kept in", "mean rank"}};
  for (std::size_t k = 0; k < result.across.size() && k < 10; ++k) {
    const KeptAcross& f = result.across[k];
    top.push_back({f.feature, std::to_string(f.kept_in) + " of " + std::to_string(splits), fixed(f.mean_rank, 1)});
  }
  out << table_text(top, 1);
  out << "  wrote " << join_path(dir, "folds.tsv") << ", kept-across-folds.tsv, and per split "
      << (result.splits.empty() ? std::string() : result.splits.front().name) << " ... "
      << (result.splits.empty() ? std::string() : result.splits.back().name)
      << "/: the reduce outputs and training-samples.txt, held-out/: the apply outputs\n";
  return out.str();
}

}  // namespace pare

// The projection's files: scores.csv, loadings.tsv (written and read back), explained.tsv.
#include <algorithm>    // std::min
#include <charconv>     // std::from_chars
#include <cstdint>      // std::int64_t
#include <string>       // std::string, std::to_string
#include <string_view>  // std::string_view
#include <vector>       // std::vector

#include "pare/error.h"
#include "pare/io.h"
#include "pare/projection.h"

#include "internal/format.h"
#include "internal/omp.h"

namespace pare {

using Eigen::Index;

std::string scores_csv(const Eigen::MatrixXd& scores, const std::vector<std::string>& sample_ids) {
  // Ids and numbers only, headed `sample` whatever the input's id column was called, so the file
  // reads as a numeric table with the ids as row names; per-sample facts are in samples.tsv.
  std::string out = "sample";
  for (Index c = 0; c < scores.cols(); ++c) out += ",PC" + std::to_string(c + 1);
  out += '\n';
  for (Index i = 0; i < scores.rows(); ++i) {
    internal::append_field(out, sample_ids[static_cast<std::size_t>(i)], ',');
    for (Index c = 0; c < scores.cols(); ++c) {
      out += ',';
      internal::append_number(out, scores(i, c));
    }
    out += '\n';
  }
  return out;
}

void write_loadings_tsv(const Eigen::MatrixXd& loadings, const std::vector<std::string>& names,
                        const std::function<void(std::string_view)>& sink) {
  std::string head = "feature";
  for (Index c = 0; c < loadings.cols(); ++c) head += "\tPC" + std::to_string(c + 1);
  head += '\n';
  sink(head);
  // Pieces of 1,024 lines formatted in parallel, a round of 4 per thread at a time, handed to
  // `sink` in order (the text of a round, not of the whole file, is in memory at once).
  constexpr Index kLines = 1024;
  const int threads = internal::thread_count(0);
  const Index pieces = (loadings.rows() + kLines - 1) / kLines,
              round = 4 * static_cast<Index>(threads);
  std::vector<std::string> text(static_cast<std::size_t>(round));
  for (Index first = 0; first < pieces; first += round) {
    const Index count = std::min(round, pieces - first);
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
    for (Index i = 0; i < count; ++i) {
      std::string& t = text[static_cast<std::size_t>(i)];
      t.clear();
      const Index piece = first + i;
      for (Index j = piece * kLines; j < std::min(loadings.rows(), (piece + 1) * kLines); ++j) {
        internal::append_field(t, names[static_cast<std::size_t>(j)], '\t');
        for (Index c = 0; c < loadings.cols(); ++c) {
          t += '\t';
          internal::append_number(t, loadings(j, c));
        }
        t += '\n';
      }
    }
    for (Index i = 0; i < count; ++i) sink(text[static_cast<std::size_t>(i)]);
  }
}

std::string loadings_tsv(const Eigen::MatrixXd& loadings, const std::vector<std::string>& names) {
  std::string out;
  write_loadings_tsv(loadings, names, [&](std::string_view piece) { out += piece; });
  return out;
}

std::string explained_tsv(const Projection& pr) {
  std::string out = "component\teigenvalue\tratio\tcumulative_ratio\tsingular_value\n";
  for (Index c = 0; c < pr.singular_values.size(); ++c) {
    out += "PC" + std::to_string(c + 1);
    for (double v : {pr.eigenvalues(c), pr.ratio(c), pr.cumulative(c), pr.singular_values(c)}) {
      out += '\t';
      internal::append_number(out, v);
    }
    out += '\n';
  }
  return out;
}

Eigen::MatrixXd read_loadings_tsv(const std::string& path, const std::vector<std::string>& names) {
  // Parsed in double (the matrix reader stores float32), so the values are exactly those written.
  const std::string text = read_file_text(path);
  std::size_t pos = 0;
  std::int64_t line = 0;
  Eigen::MatrixXd loadings;
  Index columns = -1;
  std::size_t row = 0;
  std::int64_t next_line = 1;
  while (pos < text.size()) {
    // A record ends at the first line break outside quotes (a quoted name may hold one).
    std::size_t end = pos;
    bool quoted = false;
    line = next_line;
    for (; end < text.size(); ++end) {
      if (text[end] == '"') quoted = !quoted;
      if (text[end] == '\n') {
        ++next_line;
        if (!quoted) break;
      }
    }
    std::string_view content(text.data() + pos, end - pos);
    if (!content.empty() && content.back() == '\r') content.remove_suffix(1);
    pos = end + 1;
    if (content.empty()) continue;
    const auto fields = split_fields(content, '\t');
    if (line == 1) {
      columns = static_cast<Index>(fields.size()) - 1;
      if (columns < 1) throw_input_error({path, 1}, "the loadings file has no component columns");
      loadings.resize(static_cast<Index>(names.size()), columns);
      continue;
    }
    if (static_cast<Index>(fields.size()) != columns + 1)
      throw_input_error({path, line}, "line has " + std::to_string(fields.size()) +
                                          " fields, the header has " + std::to_string(columns + 1));
    if (row >= names.size() || fields[0] != names[row])
      throw_input_error({path, line, 1},
                        "the loadings do not list the plan's features in the plan's order",
                        "use the loadings.tsv written with this plan");
    for (Index c = 0; c < columns; ++c) {
      const std::string& f = fields[static_cast<std::size_t>(c + 1)];
      double v = 0;
      const auto r = std::from_chars(f.data(), f.data() + f.size(), v);
      if (r.ec != std::errc() || r.ptr != f.data() + f.size())
        throw_input_error({path, line}, "cannot read \"" + f + "\" as a number");
      loadings(static_cast<Index>(row), c) = v;
    }
    ++row;
  }
  if (columns < 0 || row != names.size())
    throw_input_error({path}, "the loadings file lists " + std::to_string(row) +
                                  " features, the plan " + std::to_string(names.size()));
  return loadings;
}

}  // namespace pare

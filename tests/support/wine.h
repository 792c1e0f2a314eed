// The wine data of Debian's python3-sklearn as a pare table, for the pipeline and plan tests.
#pragma once

#include <string>  // std::string

#include "pare/io.h"
#include "pare/reduce.h"
#include "support/public_data.h"
#include "support/temp_dir.h"

namespace pare::test {

// The wine data of Debian's python3-sklearn (178 samples x 13 features, 3 classes), as a
// rows=samples CSV with a label column, and read back as a table.
inline pare::FeatureTable wine_table(const TempDir& dir, bool& present) {
  const PublicData d = read_public("wine_data.csv", 1);
  present = d.present;
  pare::ReadOptions read;
  read.label_column = "class";
  if (!present) return {};
  return pare::read_table(dir.write("wine.csv", labelled_csv_text(d)), read);
}

inline pare::ReduceOptions wine_options() {
  pare::ReduceOptions o;
  o.max_corr = 0.8;  // wine's largest |r| is about 0.86 (flavanoids, total phenols): one is dropped
  o.keep = 10;
  return o;
}

}  // namespace pare::test

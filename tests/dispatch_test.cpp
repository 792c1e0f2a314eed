// The kernels chosen at run time (src/kernels/kernels.h): every instruction-set level this
// processor has, and the baseline forced, must give the same bits, both for the kernels on their
// own at the sizes pare uses and for whole `pare reduce` runs. The numbers are pixels of the
// handwritten digits Debian's python3-sklearn ships (digits.csv.gz, 1,797 images of 8 x 8 pixels
// valued 0 to 16), arranged into matrices of the shapes the products meet. The kernels' results
// are also checked against their definition (a sum in increasing order, each product rounded
// before it is added), computed here by plain loops, and against Eigen's products.
#include <cmath>    // std::abs, std::sqrt, std::nan
#include <cstdint>  // std::int8_t, std::int32_t
#include <cstring>  // std::memcmp
#include <string>   // std::string
#include <vector>   // std::vector

#include <Eigen/Core>
#include <catch2/catch.hpp>

#include "internal/pair_screen.h"
#include "kernels/kernels.h"
#include "support/cli_run.h"
#include "support/public_data.h"
#include "support/temp_dir.h"

namespace {

namespace kernels = pare::kernels;
using Eigen::Index;
using MatF = Eigen::MatrixXf;
using MatD = Eigen::MatrixXd;

// The levels to compare: the baseline (forced on any processor) and every other level this
// processor and build support.
std::vector<kernels::Level> levels() {
  std::vector<kernels::Level> out{kernels::Level::kBaseline};
  for (const auto l : {kernels::Level::kAvx2, kernels::Level::kAvx512})
    if (kernels::level_supported(l)) out.push_back(l);
  return out;
}

// Forces a level for a scope, then goes back to the best one.
struct AtLevel {
  explicit AtLevel(kernels::Level l) { REQUIRE(kernels::force_level(l)); }
  ~AtLevel() { kernels::reset_level(); }
  AtLevel(const AtLevel&) = delete;
  AtLevel& operator=(const AtLevel&) = delete;
};

// The digit images, pixel values as numbers: image i, pixel q.
struct Digits {
  std::vector<std::vector<double>> pixels;
  std::vector<std::string> classes;
  pare::test::PublicData data;
};

Digits read_digits() {
  Digits d;
  d.data = pare::test::read_public("digits.csv.gz", 0);
  for (const auto& row : d.data.values) {
    std::vector<double> v;
    for (const auto& f : row) v.push_back(std::stod(f));
    d.pixels.push_back(v);
  }
  d.classes = d.data.classes;
  return d;
}

// An n x p matrix whose row i holds the pixels of images i, i + 1, ... (p / 64 of them, wrapping
// around), centred on 8 and divided by 4 so that values and products have both signs.
template <typename M>
M digit_matrix(const Digits& d, Index n, Index p, Index first = 0) {
  M m(n, p);
  const auto images = static_cast<Index>(d.pixels.size());
  for (Index j = 0; j < p; ++j)
    for (Index i = 0; i < n; ++i)
      m(i, j) = static_cast<typename M::Scalar>(
          (d.pixels[static_cast<std::size_t>((first + i + j / 64) % images)]
                   [static_cast<std::size_t>(j % 64)] -
           8) /
          4);
  return m;
}

template <typename T>
bool same_bits(const std::vector<T>& a, const std::vector<T>& b) {
  return a.size() == b.size() && std::memcmp(a.data(), b.data(), a.size() * sizeof(T)) == 0;
}

// The defined value of one entry: sum over l of a(i, l) b(l, j), in increasing l, each product
// rounded to T before it is added (volatile keeps the compiler from fusing the two).
template <typename T, typename A, typename B>
T defined_entry(const A& a, const B& b, Index i, Index j, Index k, T start) {
  T acc = start;
  for (Index l = 0; l < k; ++l) {
    volatile T product = static_cast<T>(a(i, l)) * static_cast<T>(b(l, j));
    acc += product;
  }
  return acc;
}

}  // namespace

TEST_CASE("dispatch: the kernels give the same bits at every level, as defined", "[dispatch]") {
  const Digits d = read_digits();
  if (!d.data.present) return;
  INFO("levels: baseline" << (kernels::level_supported(kernels::Level::kAvx2) ? ", avx2" : "")
                          << (kernels::level_supported(kernels::Level::kAvx512) ? ", avx512" : ""));

  // Shapes of the PCA's products: X is n x p (1,000 samples, a Gram piece of 2,048 features).
  const Index n = 1000, p = 2048, l = 60;
  const MatF x = digit_matrix<MatF>(d, n, p);
  const MatF y = digit_matrix<MatF>(d, n, l, 500);    // X^T Y: n x l
  const MatF b = digit_matrix<MatF>(d, p, l, 900);    // X B: p x l
  const MatD yd = digit_matrix<MatD>(d, n, l, 1200);  // double X^T Y
  const MatD sym = digit_matrix<MatD>(d, n, n, 300);  // a symmetric matrix, lower triangle used
  const MatD q = digit_matrix<MatD>(d, n, l, 77);
  const MatF odd_a = digit_matrix<MatF>(d, 37, 301, 11),
             odd_b = digit_matrix<MatF>(d, 301, 13, 1500);
  const MatF odd_c = digit_matrix<MatF>(d, 301, 5, 222);

  struct Results {
    std::vector<float> gram, times, times_t, odd, odd_t;
    std::vector<double> times_t_d, symmetric, gram_d;
    std::vector<kernels::Stats> stats;
    std::vector<kernels::Moments> moments;
    std::vector<double> dots;
  };
  std::vector<Results> all;
  for (const kernels::Level level : levels()) {
    INFO("level " << kernels::level_name(level));
    const AtLevel at(level);
    REQUIRE(kernels::active_level() == level);
    Results r;
    // The lower triangle of rows 128..255 of X X^T (a stripe of the float Gram matrix); the
    // entries above the diagonal must stay as they were (NaN here).
    {
      const Index r0 = 128, h = 128, r1 = r0 + h;
      r.gram.assign(static_cast<std::size_t>(h * r1), std::nanf(""));
      kernels::Operand rows = kernels::columns(x.data() + r0, n);
      kernels::gemm(kernels::Shape{h, r1, p, true, r0}, rows,
                    kernels::transposed(kernels::columns(x.data(), n)), r.gram.data(), h, false);
      for (Index j = 0; j < r1; ++j)
        for (Index i = 0; i < h; ++i) {
          const float v = r.gram[static_cast<std::size_t>(i + j * h)];
          if (j > r0 + i) {
            REQUIRE(std::isnan(v));
          } else if ((i * 7 + j) % 97 == 0) {
            INFO("gram entry " << i << ", " << j);
            REQUIRE(v == defined_entry<float>(x.middleRows(r0, h), x.transpose(), i, j, p, 0.0f));
          }
        }
    }
    // Y = X B accumulated over pieces of 256 terms (as the PCA's X B).
    {
      r.times.assign(static_cast<std::size_t>(n * l), 0.0f);
      for (Index c0 = 0; c0 < p; c0 += 256)
        kernels::gemm(kernels::Shape{n, l, 256}, kernels::columns(x.data() + c0 * n, n),
                      kernels::columns(b.data() + c0, p), r.times.data(), n, true);
      for (Index i = 0; i < n; i += 53)
        for (Index j = 0; j < l; j += 7)
          REQUIRE(r.times[static_cast<std::size_t>(i + j * n)] ==
                  defined_entry<float>(x, b, i, j, p, 0.0f));
    }
    // W = X^T Y (p x l), computed internally as (Y^T X)^T.
    {
      r.times_t.assign(static_cast<std::size_t>(p * l), 0.0f);
      kernels::gemm(kernels::Shape{p, l, n}, kernels::transposed(kernels::columns(x.data(), n)),
                    kernels::columns(y.data(), n), r.times_t.data(), p, false);
      const MatF xt = x.transpose();
      for (Index i = 0; i < p; i += 61)
        for (Index j = 0; j < l; j += 11)
          REQUIRE(r.times_t[static_cast<std::size_t>(i + j * p)] ==
                  defined_entry<float>(xt, y, i, j, n, 0.0f));
    }
    // In double from the float X, and a symmetric matrix from its lower triangle.
    {
      r.times_t_d.assign(static_cast<std::size_t>(p * l), 0.0);
      kernels::gemm(kernels::Shape{p, l, n}, kernels::transposed(kernels::columns(x.data(), n)),
                    kernels::columns(yd.data(), n), r.times_t_d.data(), p, false);
      const MatD xt = x.transpose().cast<double>();
      for (Index i = 0; i < p; i += 61)
        for (Index j = 0; j < l; j += 11)
          REQUIRE(r.times_t_d[static_cast<std::size_t>(i + j * p)] ==
                  defined_entry<double>(xt, yd, i, j, n, 0.0));
      kernels::Operand s = kernels::columns(sym.data(), n);
      s.lower_symmetric = true;
      r.symmetric.assign(static_cast<std::size_t>(n * l), 0.0);
      kernels::gemm(kernels::Shape{n, l, n}, s, kernels::columns(q.data(), n), r.symmetric.data(),
                    n, false);
      const MatD full = sym.selfadjointView<Eigen::Lower>();
      for (Index i = 0; i < n; i += 97)
        for (Index j = 0; j < l; j += 13)
          REQUIRE(r.symmetric[static_cast<std::size_t>(i + j * n)] ==
                  defined_entry<double>(full, q, i, j, n, 0.0));
      // The lower triangle of X X^T in double (the dense PCA's Gram matrix), accumulated.
      r.gram_d.assign(static_cast<std::size_t>(256 * 256), 1.0);
      kernels::gemm(kernels::Shape{256, 256, p, true, 0}, kernels::columns(x.data(), n),
                    kernels::transposed(kernels::columns(x.data(), n)), r.gram_d.data(), 256, true);
      const MatD xd = x.topRows(256).cast<double>();
      const MatD xdt = xd.transpose();
      for (Index j = 0; j < 256; j += 17)
        for (Index i = j; i < 256; i += 19)
          REQUIRE(r.gram_d[static_cast<std::size_t>(i + j * 256)] ==
                  defined_entry<double>(xd, xdt, i, j, p, 1.0));
    }
    // Sizes that leave partial tiles on every side, accumulated into C.
    {
      r.odd.assign(static_cast<std::size_t>(37 * 13), 0.5f);
      kernels::gemm(kernels::Shape{37, 13, 301}, kernels::columns(odd_a.data(), 37),
                    kernels::columns(odd_b.data(), 301), r.odd.data(), 37, true);
      for (Index i = 0; i < 37; ++i)
        for (Index j = 0; j < 13; ++j)
          REQUIRE(r.odd[static_cast<std::size_t>(i + j * 37)] ==
                  defined_entry<float>(odd_a, odd_b, i, j, 301, 0.5f));
      // A transposed A (computed as (B^T A^T)^T), accumulated.
      r.odd_t.assign(static_cast<std::size_t>(13 * 5), 0.25f);
      kernels::gemm(kernels::Shape{13, 5, 301},
                    kernels::transposed(kernels::columns(odd_b.data(), 301)),
                    kernels::columns(odd_c.data(), 301), r.odd_t.data(), 13, true);
      const MatF odd_bt = odd_b.transpose();
      for (Index i = 0; i < 13; ++i)
        for (Index j = 0; j < 5; ++j)
          REQUIRE(r.odd_t[static_cast<std::size_t>(i + j * 13)] ==
                  defined_entry<float>(odd_bt, odd_c, i, j, 301, 0.25f));
    }
    // Column statistics (with gaps), pruning's moments and Pearson sums, over the pixel columns
    // of the 1,000 x 2,048 matrix (n = 1,000 is not a multiple of the 8 lanes' width, 999 neither).
    for (Index j = 0; j < p; j += 5) {
      std::vector<float> col(x.col(j).data(), x.col(j).data() + n);
      for (Index i = j % 13; i < n; i += 31) col[static_cast<std::size_t>(i)] = std::nanf("");
      r.stats.push_back(kernels::column_stats(col.data(), col.size() - 1));
      r.moments.push_back(kernels::moments(x.col(j).data(), n - 1));
      const kernels::Moments& m = r.moments.back();
      r.dots.push_back(
          kernels::centered_dot(x.col(j).data(), m.mean, x.col((j + 64) % p).data(), 0.25, n));
    }
    all.push_back(std::move(r));
  }
  // Every level against the baseline, bit for bit.
  for (std::size_t k = 1; k < all.size(); ++k) {
    INFO("level " << kernels::level_name(levels()[k]) << " against the baseline");
    CHECK(same_bits(all[k].gram, all[0].gram));
    CHECK(same_bits(all[k].times, all[0].times));
    CHECK(same_bits(all[k].times_t, all[0].times_t));
    CHECK(same_bits(all[k].times_t_d, all[0].times_t_d));
    CHECK(same_bits(all[k].symmetric, all[0].symmetric));
    CHECK(same_bits(all[k].gram_d, all[0].gram_d));
    CHECK(same_bits(all[k].odd, all[0].odd));
    CHECK(same_bits(all[k].odd_t, all[0].odd_t));
    CHECK(same_bits(all[k].stats, all[0].stats));
    CHECK(same_bits(all[k].moments, all[0].moments));
    CHECK(same_bits(all[k].dots, all[0].dots));
  }
  // And the values against Eigen's products in double: a float sum of k terms of size s is within
  // about k 2^-24 s of its value; 2e-4 of the sum of |terms| allows for it at k = 2,048.
  const Results& r = all[0];
  const MatD xd = x.cast<double>();
  const MatD times_ref = xd * b.cast<double>(), times_t_ref = xd.transpose() * y.cast<double>();
  const MatD times_abs = xd.cwiseAbs() * b.cast<double>().cwiseAbs();
  const MatD times_t_abs = xd.cwiseAbs().transpose() * y.cast<double>().cwiseAbs();
  for (Index j = 0; j < l; ++j) {
    for (Index i = 0; i < n; ++i)
      REQUIRE(std::abs(r.times[static_cast<std::size_t>(i + j * n)] - times_ref(i, j)) <=
              2e-4 * times_abs(i, j));
    for (Index i = 0; i < p; ++i)
      REQUIRE(std::abs(r.times_t[static_cast<std::size_t>(i + j * p)] - times_t_ref(i, j)) <=
              2e-4 * times_t_abs(i, j));
  }
  // In double, 1e-12 of the sum of |terms| (k = 1,000 terms, 2^-53 each).
  const MatD times_t_d_ref = xd.transpose() * yd;
  const MatD times_t_d_abs = xd.cwiseAbs().transpose() * yd.cwiseAbs();
  for (Index j = 0; j < l; ++j)
    for (Index i = 0; i < p; ++i)
      REQUIRE(std::abs(r.times_t_d[static_cast<std::size_t>(i + j * p)] - times_t_d_ref(i, j)) <=
              1e-12 * times_t_d_abs(i, j));
  // The integer dot product of pruning's 8-bit second look (internal/pair_screen.h): exact.
  std::vector<std::int8_t> u(4096), v(4096);
  for (std::size_t i = 0; i < u.size(); ++i) {
    u[i] = static_cast<std::int8_t>(8 * d.pixels[i / 64][i % 64] - 64);
    v[i] = static_cast<std::int8_t>(127 - 15 * d.pixels[1000 + i / 64][i % 64]);
  }
  std::int32_t expected = 0;
  for (std::size_t i = 0; i < u.size(); ++i) expected += u[i] * v[i];
  for (const kernels::Level level : levels()) {
    const AtLevel at(level);
    REQUIRE(kernels::dot_i8(u.data(), v.data(), 4096) == expected);
    REQUIRE(kernels::dot_i8(u.data() + 3, v.data() + 1, 4000) ==
            kernels::dot_i8(v.data() + 1, u.data() + 3, 4000));
  }
}

TEST_CASE("dispatch: pruning's 8-bit pair bound finds the same pairs at every level", "[dispatch]") {
  // Pruning's 8-bit first look (internal/pair_screen.h): the portable loop, the SSE2 kernel
  // (baseline), the AVX2 kernel and the VNNI kernel (AVX-512, where the processor has VNNI) must
  // list the same pairs with the same products. Columns: 200 pixel columns over 1,000 images,
  // standardised; S is the first 169 samples (as pruning chooses for 1,000 samples at --max-corr
  // 0.9).
  const Digits d = read_digits();
  if (!d.data.present) return;
  const Index n = 1000, m = 169, count = 200;
  const MatD x = digit_matrix<MatD>(d, n, count, 40);
  std::vector<std::vector<float>> z;
  for (Index j = 0; j < count; ++j) {
    const double mean = x.col(j).mean();
    const double norm = (x.col(j).array() - mean).matrix().norm();
    std::vector<float> col(static_cast<std::size_t>(n));
    for (Index i = 0; i < n; ++i)
      col[static_cast<std::size_t>(i)] = static_cast<float>((x(i, j) - mean) / norm);
    z.push_back(col);
  }
  pare::internal::PairCodeBlock block;
  block.reset(m, count);
  for (Index b = 0; b < count; ++b) {
    double rest = 0;
    for (Index i = m; i < n; ++i)
      rest += double(z[static_cast<std::size_t>(b)][static_cast<std::size_t>(i)]) *
              double(z[static_cast<std::size_t>(b)][static_cast<std::size_t>(i)]);
    block.set(b, z[static_cast<std::size_t>(b)].data(), std::sqrt(rest));
  }
  pare::internal::PairCodeKept kept(block.padded());
  for (Index b = 0; b < count - 3; ++b) kept.append(block, b);  // 197 kept: a partial last group
  std::vector<std::vector<std::pair<std::int64_t, float>>> found;
  std::vector<std::string> names;
  for (int run = -1; run < static_cast<int>(levels().size()); ++run) {
    // Run -1: the portable loop.
    const kernels::Level level =
        run < 0 ? kernels::Level::kBaseline : levels()[static_cast<std::size_t>(run)];
    const AtLevel at(level);
    pare::internal::pair_code_allow_vnni(run >= 0);
    names.push_back(run < 0 ? "portable" : kernels::level_name(level));
    INFO("kernel " << names.back());
    REQUIRE(pare::internal::pair_code_uses_avx2() == (run >= 0 && level != kernels::Level::kBaseline &&
                                                      !pare::internal::pair_code_uses_vnni()));
    std::vector<std::pair<std::int64_t, float>> pairs;
    for (float cut : {0.2f, 0.5f, 0.8f})
      for (Index first = 0; first < count; first += pare::internal::kPairCodeTile) {
        const int width =
            static_cast<int>(std::min<Index>(pare::internal::kPairCodeTile, count - first));
        pare::internal::PairCodeSurvivors tile;
        pare::internal::pair_code_find(kept, block, cut, first, width, 0, 5, tile);
        pare::internal::pair_code_find(kept, block, cut, first, width, 5, kept.groups(), tile);
        for (int c = 0; c < width; ++c)
          for (const auto& hit : tile[static_cast<std::size_t>(c)])
            pairs.emplace_back((first + c) * 1000 + hit.k, hit.product);
      }
    found.push_back(std::move(pairs));
  }
  pare::internal::pair_code_allow_vnni(true);
  REQUIRE(found[0].size() > 1000);  // the pairs of a column with itself, and many more
  for (std::size_t k = 1; k < found.size(); ++k) {
    INFO(names[k] << " against the portable loop");
    REQUIRE(found[k] == found[0]);
  }
}

namespace {

// The digits as a table for the command line: row i holds the pixels of `images` consecutive
// images from image i on (wrapping around), and the class of image i.
std::string digits_table(const Digits& d, std::size_t rows, std::size_t images) {
  // (Appended piece by piece: `",p" + std::to_string(j)` draws a false -Wrestrict from GCC 12.)
  std::string out = "id";
  for (std::size_t j = 0; j < 64 * images; ++j) {
    out += ",p";
    out += std::to_string(j + 1);
  }
  out += ",digit\n";
  for (std::size_t i = 0; i < rows; ++i) {
    out += 's';
    out += std::to_string(i + 1);
    for (std::size_t t = 0; t < images; ++t)
      for (const auto& value : d.data.values[(i + t) % d.data.n()]) {
        out += ',';
        out += value;
      }
    out += ",d";
    out += d.classes[i];
    out += '\n';
  }
  return out;
}

}  // namespace

TEST_CASE("dispatch: pare reduce writes the same files at every level", "[dispatch]") {
  const Digits d = read_digits();
  if (!d.data.present) return;
  pare::test::TempDir dir;
  struct Case {
    std::string name;
    std::size_t rows, images;
    std::vector<std::string> options;
  };
  // 400 x 1,600: the sample screen iterates on the float Gram matrix (400 samples), the PCA in
  // double with block Krylov. 1,797 x 320 (tall): the screen with float products, the PCA on X^T X.
  // 1,797 x 64: the dense PCA. --max-corr 0.3 makes pruning compare all pairs by their float
  // product (the 8-bit first look needs a subset of under 60% of the samples).
  const std::vector<Case> cases = {
      {"wide", 400, 25, {"--components", "5"}},
      {"tall", 1797, 5, {"--components", "12", "--max-corr", "0.3"}},
      {"dense", 1797, 1, {"--components", "10"}},
  };
  const std::vector<std::string> files = {"ranking.tsv", "selection-log.tsv", "reduced.csv",
                                          "scores.csv",  "loadings.tsv",      "explained.tsv",
                                          "samples.tsv"};
  for (const Case& c : cases) {
    INFO("case " << c.name);
    const std::string data = dir.write(c.name + ".csv", digits_table(d, c.rows, c.images));
    std::vector<std::vector<std::string>> outputs;
    for (const kernels::Level level : levels()) {
      INFO("level " << kernels::level_name(level));
      const AtLevel at(level);
      // The VNNI loop of pruning's 8-bit pair bound runs only with the AVX-512 kernels.
      if (level != kernels::Level::kAvx512) REQUIRE_FALSE(pare::internal::pair_code_uses_vnni());
      const std::string out = dir.file(c.name + "-" + kernels::level_name(level));
      std::vector<std::string> args = {"reduce",    data, "--label", "digit",
                                       "--threads", "2",  "--out",   out};
      args.insert(args.end(), c.options.begin(), c.options.end());
      const pare::test::Run r = pare::test::run(args);
      INFO(r.err << r.out);
      REQUIRE(r.code == 0);
      std::vector<std::string> texts;
      for (const auto& f : files) texts.push_back(pare::test::TempDir::read(out + "/" + f));
      outputs.push_back(std::move(texts));
    }
    // Something was pruned and projected, so the kernels had work.
    REQUIRE(outputs[0][1].find("\tredundancy\t") != std::string::npos);
    REQUIRE(outputs[0][3].find("PC5") != std::string::npos);
    for (std::size_t k = 1; k < outputs.size(); ++k)
      for (std::size_t f = 0; f < files.size(); ++f) {
        INFO(files[f] << ": level " << kernels::level_name(levels()[k]) << " against the baseline");
        CHECK(outputs[k][f] == outputs[0][f]);
      }
  }
}

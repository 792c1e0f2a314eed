// pare::truncated_pca and pare::project_rows against outside values (/work/shared/CHECKS.md §9):
// published explained-variance ratios of iris and breast cancer (the Debian python3-sklearn dataset
// files, read here directly), the SVD worked example of a 4 x 5 matrix, and Eigen's own
// self-adjoint eigensolver on a Gram matrix formed explicitly in the test. Also: the dense and
// block Krylov paths agree, wide and tall shapes, K = min(n, p), the error paths, thread
// independence, the sign convention and project_rows on the training rows.
#include "pare/pipeline.h"
#include "pare/projection.h"

#include <algorithm>  // std::max, std::min
#include <cmath>      // std::sqrt, std::abs, std::pow, std::ldexp
#include <cstdint>    // std::int64_t
#include <cstdlib>    // std::getenv
#include <cstring>    // std::memcmp
#include <fstream>    // std::ifstream
#include <random>     // std::mt19937_64, std::normal_distribution
#include <sstream>    // std::istringstream
#include <string>     // std::string, std::stod
#include <utility>    // std::pair
#include <vector>     // std::vector

#include <Eigen/Eigenvalues>
#include <Eigen/SVD>
#include <catch2/catch.hpp>

#include "pare/error.h"

namespace {

using Eigen::Index;
using Eigen::MatrixXd;
using Eigen::VectorXd;

const std::string kDataDir = "/usr/lib/python3/dist-packages/sklearn/datasets/data/";

bool in_ci() {
  const char* ci = std::getenv("CI");
  return ci != nullptr && std::string(ci) == "true";
}

// A Debian sklearn dataset file (CHECKS.md §10): header `n,p,class names...`, then n lines of p
// values and a class index. Returns an empty matrix when the file is missing outside CI; under
// CI=true a missing file fails (scripts/install-deps.sh installs python3-sklearn).
pare::Matrix read_sklearn_csv(const std::string& name, Index rows, Index cols) {
  const std::string path = kDataDir + name;
  std::ifstream f(path);
  if (!f) {
    INFO("dataset file " << path << " is missing; CI=true makes that a failure");
    REQUIRE_FALSE(in_ci());
    WARN("skipped: " << path << " not found (install python3-sklearn)");
    return {};
  }
  std::string line;
  std::getline(f, line);
  std::istringstream header(line);
  std::string field;
  std::getline(header, field, ',');
  const Index n = std::stol(field);
  std::getline(header, field, ',');
  const Index p = std::stol(field);
  INFO(path << " header says " << n << " x " << p);
  REQUIRE(n == rows);
  REQUIRE(p == cols);
  pare::Matrix x(n, p);
  Index i = 0;
  while (std::getline(f, line)) {
    if (line.empty()) continue;
    REQUIRE(i < n);
    std::istringstream cells(line);
    for (Index j = 0; j < p; ++j) {
      REQUIRE(std::getline(cells, field, ','));
      x(i, j) = static_cast<float>(std::stod(field));
    }
    ++i;
  }
  REQUIRE(i == n);
  return x;
}

// X = sum_c s_c a_c b_c^T + noise, with s_c = 0.8^c (a decaying spectrum with gaps of about 20%
// between neighbours) and feature means in [-5, 5]; feature c also scaled by 1 + (j % 7) so that
// correlation PCA differs from covariance PCA. Deterministic for a seed.
pare::Matrix decaying(Index n, Index p, std::uint64_t seed, int rank = 30, double noise = 1e-3) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::uniform_real_distribution<double> uniform(-5.0, 5.0);
  MatrixXd a(n, rank), b(p, rank);
  for (Index c = 0; c < rank; ++c) {
    for (Index i = 0; i < n; ++i) a(i, c) = normal(gen);
    for (Index j = 0; j < p; ++j) b(j, c) = normal(gen) * std::pow(0.8, static_cast<double>(c));
  }
  MatrixXd x = a * b.transpose();
  for (Index j = 0; j < p; ++j) {
    const double mean = uniform(gen), spread = 1.0 + static_cast<double>(j % 7);
    for (Index i = 0; i < n; ++i) x(i, j) = (x(i, j) + noise * normal(gen)) * spread + mean;
  }
  return x.cast<float>();
}

// Reference: Eigen::SelfAdjointEigenSolver on the p x p Gram matrix X^T X of the analysed matrix
// (the one truncated_pca leaves in x), formed here in double. Eigenvectors = right singular
// vectors, eigenvalues = sigma^2. Sorted largest first.
struct Reference {
  VectorXd sigma;
  MatrixXd v;
};

Reference gram_reference(const pare::Matrix& analysed, Index k) {
  const MatrixXd x = analysed.cast<double>();
  const MatrixXd g = x.transpose() * x;
  Eigen::SelfAdjointEigenSolver<MatrixXd> es(g);
  REQUIRE(es.info() == Eigen::Success);
  Reference r;
  r.sigma = es.eigenvalues().tail(k).reverse().cwiseMax(0.0).cwiseSqrt();
  r.v = es.eigenvectors().rightCols(k).rowwise().reverse();
  return r;
}

// sin of the largest principal angle between the column spaces of two p x k matrices with
// orthonormal columns: || (I - A A^T) B ||_2.
double largest_angle_sine(const MatrixXd& a, const MatrixXd& b) {
  const MatrixXd rest = b - a * (a.transpose() * b);
  Eigen::JacobiSVD<MatrixXd> svd(rest);
  return svd.singularValues()(0);
}

// The sign convention of SPEC §4: in every component the entry of largest magnitude is positive.
bool sign_convention_holds(const MatrixXd& loadings) {
  for (Index c = 0; c < loadings.cols(); ++c) {
    Index at = 0;
    loadings.col(c).cwiseAbs().maxCoeff(&at);
    if (!(loadings(at, c) > 0)) return false;
  }
  return true;
}

// Largest |difference| of two loading columns after putting both under the sign convention.
double loading_difference(const MatrixXd& got, const MatrixXd& want) {
  double worst = 0;
  for (Index c = 0; c < want.cols(); ++c) {
    Index at = 0;
    want.col(c).cwiseAbs().maxCoeff(&at);
    const double sign = want(at, c) < 0 ? -1.0 : 1.0;
    worst = std::max(worst, (got.col(c) - sign * want.col(c)).cwiseAbs().maxCoeff());
  }
  return worst;
}

bool bit_identical(const MatrixXd& a, const MatrixXd& b) {
  return a.rows() == b.rows() && a.cols() == b.cols() &&
         std::memcmp(a.data(), b.data(), sizeof(double) * static_cast<std::size_t>(a.size())) == 0;
}

pare::Projection run_pca(pare::Matrix x, std::int64_t k, bool center = true, bool scale = false,
                         std::int64_t oversample = 10, int threads = 0) {
  pare::ProjectionOptions o;
  o.components = k;
  o.center = center;
  o.scale = scale;
  o.oversample = oversample;
  o.threads = threads;
  return pare::truncated_pca(x, o);
}

// Checks shared by every result: ratios, cumulative, eigenvalues consistent with sigma;
// loadings orthonormal; scores = analysed matrix x loadings; sign convention.
void check_internal_consistency(const pare::Projection& pr, const pare::Matrix& analysed) {
  const Index n = analysed.rows(), k = pr.singular_values.size();
  const MatrixXd x = analysed.cast<double>();
  const double frobenius2 = x.squaredNorm();
  // Definitions in projection.h / README: eigenvalue = sigma^2 / (n - 1), ratio = sigma^2 /
  // ||X||_F^2, cumulative = running sum. Same formulas in double: 1e-12 relative; ||X||_F^2 is
  // a sum of up to 10^6 squares taken here in another order (worst case N eps = 2e-10): 1e-9.
  double running = 0;
  for (Index c = 0; c < k; ++c) {
    const double s2 = pr.singular_values(c) * pr.singular_values(c);
    running += pr.ratio(c);
    INFO("component " << c + 1 << " sigma " << pr.singular_values(c));
    REQUIRE(pr.eigenvalues(c) ==
            Approx(s2 / static_cast<double>(n - 1)).epsilon(1e-12).margin(1e-300));
    REQUIRE(pr.ratio(c) == Approx(s2 / frobenius2).epsilon(1e-9).margin(1e-15));
    REQUIRE(pr.cumulative(c) == Approx(running).epsilon(1e-12));
    if (c > 0) REQUIRE(pr.singular_values(c) <= pr.singular_values(c - 1));
  }
  REQUIRE(pr.total_variance == Approx(frobenius2 / static_cast<double>(n - 1)).epsilon(1e-9));
  // Components with sigma <= 1e-6 sigma_1 are numerically zero: the analysed matrix is stored in
  // float32 (relative rounding 6e-8), so their singular vectors are rounding noise; the checks
  // below cover the others. Orthonormal loadings: V^T V = I to 1e-10 (rounding of double
  // products of unit vectors, far above 1e-15 and far below any real loss).
  Index positive = 0;
  while (positive < k && pr.singular_values(positive) > 1e-6 * pr.singular_values(0)) ++positive;
  const MatrixXd v = pr.loadings.leftCols(positive);
  const double off =
      (v.transpose() * v - MatrixXd::Identity(positive, positive)).cwiseAbs().maxCoeff();
  INFO("max |V^T V - I| " << off);
  REQUIRE(off < 1e-10);
  // Scores are U Sigma = X V (projection.h). Dense: exact up to rounding, 1e-9 of the largest
  // score. Block Krylov computes U Sigma from the Ritz vectors, so the identity holds up to the
  // Ritz residual: for component c, |X v_c - u_c sigma_c| <= ||r_c|| / sigma_c with ||r_c|| <=
  // residual x sigma_1^2, i.e. relative to sigma_1: residual x sigma_1 / sigma_c (twice that
  // allowed).
  const MatrixXd xv = x * v;
  const MatrixXd scores = pr.scores.leftCols(positive);
  const double scale = std::max(1e-300, pr.scores.cwiseAbs().maxCoeff());
  const double allowed =
      1e-9 + 2 * pr.residual * pr.singular_values(0) / pr.singular_values(positive - 1);
  INFO("max |scores - X V| / max |scores| " << (scores - xv).cwiseAbs().maxCoeff() / scale
                                            << ", allowed " << allowed << " (" << pr.method << ")");
  if (pr.method == "dense") REQUIRE(pr.residual == 0);
  REQUIRE((scores - xv).cwiseAbs().maxCoeff() <= allowed * scale);
  REQUIRE(sign_convention_holds(pr.loadings.leftCols(positive)));
}

}  // namespace

TEST_CASE("iris covariance PCA: published explained-variance ratios", "[projection]") {
  // Source: CHECKS.md §9, iris covariance ratios 0.92461872, 0.05306648, 0.01710261, 0.00521218
  // (sklearn PCA and R prcomp on Debian's python3-sklearn iris.csv; the first two are printed in
  // sklearn's example "plot_pca_vs_lda"). Tolerance 1e-6 absolute (CHECKS.md §9; older iris
  // copies with two wrong rows give 0.92461621, which this tolerance rejects).
  pare::Matrix x = read_sklearn_csv("iris.csv", 150, 4);
  if (x.size() == 0) return;
  const pare::Matrix raw = x;
  pare::ProjectionOptions o;
  o.components = 4;  // K = min(n, p)
  const pare::Projection pr = pare::truncated_pca(x, o);
  const double want[] = {0.92461872, 0.05306648, 0.01710261, 0.00521218};
  for (Index c = 0; c < 4; ++c) {
    INFO("PC" << c + 1 << " ratio " << pr.ratio(c) << ", published " << want[c]);
    REQUIRE(std::abs(pr.ratio(c) - want[c]) <= 1e-6);
  }
  REQUIRE(pr.cumulative(3) == Approx(1.0).epsilon(1e-12));
  REQUIRE(pr.method == "dense");
  check_internal_consistency(pr, x);
  // The centre is the column mean of the raw values (common practice for PCA), computed here in
  // double; 1e-12 relative covers the order of the sums.
  for (Index j = 0; j < 4; ++j)
    REQUIRE(pr.center(j) == Approx(raw.col(j).cast<double>().mean()).epsilon(1e-12));
  REQUIRE(pr.scale == VectorXd::Ones(4));
}

TEST_CASE("iris correlation PCA: published ratios and eigenvalues of R", "[projection]") {
  // Source: CHECKS.md §9, iris correlation ratios 0.72962445, 0.22850762, 0.03668922,
  // 0.00517871 and eigenvalues of the correlation matrix R 2.9184978, 0.9140305, 0.1467569,
  // 0.0207148 (V: sklearn on standardised data, R prcomp(scale. = TRUE)). Ratios 1e-6 absolute
  // (CHECKS.md §9); the eigenvalues are published to 7 decimals, so 1e-6 absolute as well.
  // With sd from ddof = 1, Z^T Z / (n - 1) = R, so eigenvalue = sigma^2 / (n - 1) is exactly an
  // eigenvalue of R, and the ratios sum to 1 with trace(R) = p = 4.
  pare::Matrix x = read_sklearn_csv("iris.csv", 150, 4);
  if (x.size() == 0) return;
  const pare::Projection pr = run_pca(x, 4, true, true);
  const double ratio[] = {0.72962445, 0.22850762, 0.03668922, 0.00517871};
  const double eigen[] = {2.9184978, 0.9140305, 0.1467569, 0.0207148};
  for (Index c = 0; c < 4; ++c) {
    INFO("PC" << c + 1 << " ratio " << pr.ratio(c) << " (published " << ratio[c] << "), eigenvalue "
              << pr.eigenvalues(c) << " (published " << eigen[c] << ")");
    REQUIRE(std::abs(pr.ratio(c) - ratio[c]) <= 1e-6);
    REQUIRE(std::abs(pr.eigenvalues(c) - eigen[c]) <= 1e-6);
  }
  INFO("total variance " << pr.total_variance);
  REQUIRE(pr.total_variance == Approx(4.0).epsilon(1e-6));  // trace(R) = p
}

TEST_CASE("breast cancer standardised PCA: published ratios", "[projection]") {
  // Source: CHECKS.md §9, breast cancer (Debian python3-sklearn breast_cancer.csv, 569 x 30)
  // standardised: 0.44272026, 0.18971182 (PC1 + PC2 = 0.63243208), then 0.09393163,
  // 0.06602135, 0.05495768 (V: sklearn PCA on StandardScaler output). Tolerance 1e-6 absolute
  // (CHECKS.md §9). The ratios do not depend on ddof because each is a share of the total.
  pare::Matrix x = read_sklearn_csv("breast_cancer.csv", 569, 30);
  if (x.size() == 0) return;
  pare::ProjectionOptions o;
  o.components = 5;
  o.scale = true;
  const pare::Projection pr = pare::truncated_pca(x, o);  // x becomes the analysed matrix
  const double want[] = {0.44272026, 0.18971182, 0.09393163, 0.06602135, 0.05495768};
  for (Index c = 0; c < 5; ++c) {
    INFO("PC" << c + 1 << " ratio " << pr.ratio(c) << ", published " << want[c]);
    REQUIRE(std::abs(pr.ratio(c) - want[c]) <= 1e-6);
  }
  INFO("PC1 + PC2 " << pr.cumulative(1));
  REQUIRE(std::abs(pr.cumulative(1) - 0.63243208) <= 1e-6);
  check_internal_consistency(pr, x);
}

TEST_CASE("SVD worked example of a 4 x 5 matrix (uncentred)", "[projection]") {
  // Source: CHECKS.md §9, Calafiore & El Ghaoui, Optimization Models and Applications (SVD of a
  // 4 x 5 matrix): A = [[1,0,0,0,2],[0,0,3,0,0],[0,0,0,0,0],[0,4,0,0,0]] has singular values 4,
  // 3, sqrt 5, 0; ||A||_F^2 = 30, so the ratios sigma^2 / ||A||_F^2 are 8/15, 0.3, 1/6, 0.
  // Right singular vectors (by hand: A^T A is diagonal apart from the (1,5) block): e2, e3,
  // (1,0,0,0,2)/sqrt 5. All entries are small integers, exact in float32 and in every product,
  // so 1e-12 covers only the eigensolver's rounding.
  pare::Matrix a = pare::Matrix::Zero(4, 5);
  a(0, 0) = 1;
  a(0, 4) = 2;
  a(1, 2) = 3;
  a(3, 1) = 4;
  const pare::Matrix raw = a;
  const pare::Projection pr = run_pca(a, 4, /*center=*/false);
  const double sigma[] = {4, 3, std::sqrt(5.0)};
  const double ratio[] = {8.0 / 15.0, 0.3, 1.0 / 6.0};
  for (Index c = 0; c < 3; ++c) {
    INFO("sigma" << c + 1 << " " << pr.singular_values(c) << ", ratio " << pr.ratio(c));
    REQUIRE(pr.singular_values(c) == Approx(sigma[c]).epsilon(1e-12));
    REQUIRE(pr.ratio(c) == Approx(ratio[c]).epsilon(1e-12));
  }
  // The fourth singular value is 0. A Gram-matrix method gets sigma as the square root of a
  // computed eigenvalue, so rounding of size eps * sigma_1^2 would show as sqrt(eps) * sigma_1
  // ~ 6e-8; here A A^T is exactly diagonal, but allow that bound.
  INFO("sigma4 " << pr.singular_values(3));
  REQUIRE(std::abs(pr.singular_values(3)) <= 1e-7);
  REQUIRE(std::abs(pr.ratio(3)) <= 1e-14);
  REQUIRE(pr.cumulative(2) == Approx(1.0).epsilon(1e-12));
  MatrixXd v = MatrixXd::Zero(5, 3);
  v(1, 0) = 1;
  v(2, 1) = 1;
  v(0, 2) = 1 / std::sqrt(5.0);
  v(4, 2) = 2 / std::sqrt(5.0);
  INFO("loadings\n" << pr.loadings);
  REQUIRE((pr.loadings.leftCols(3) - v).cwiseAbs().maxCoeff() <= 1e-12);  // signs by SPEC §4
  // Scores U Sigma: component 1 is sample 4 (4), component 2 sample 2 (3), component 3 sample 1
  // (sqrt 5); the empty sample 3 scores 0 everywhere.
  MatrixXd u_sigma = MatrixXd::Zero(4, 3);
  u_sigma(3, 0) = 4;
  u_sigma(1, 1) = 3;
  u_sigma(0, 2) = std::sqrt(5.0);
  REQUIRE((pr.scores.leftCols(3) - u_sigma).cwiseAbs().maxCoeff() <= 1e-12);
  REQUIRE(pr.scores.col(3).cwiseAbs().maxCoeff() <= 1e-7);
  REQUIRE(pr.center == VectorXd::Zero(5));  // --no-center: nothing subtracted
  REQUIRE(a == raw);                        // and the analysed matrix is the input
}

TEST_CASE("block Krylov and dense agree with the eigensolver on the Gram matrix", "[projection]") {
  // Reference: Eigen::SelfAdjointEigenSolver on X^T X formed in double in this test, for the
  // matrix truncated_pca analysed. The path is chosen by shape: min(n, p) >= 300 > 256 with
  // K + oversample = 16 runs block Krylov; oversample 300 forces the dense path on the same data.
  // Tolerances: Krylov stops when every Ritz residual ||r|| <= 1e-8 x theta_1 (the default); then eigenvalue
  // errors are at most ||r||^2 / gap (Golub & Van Loan §8.1, Kato-Temple) and vector errors
  // ||r|| / gap, with gaps here >= 5% of theta_1: sigma to 1e-9 relative, loadings to 1e-5,
  // subspace angle sine 1e-5. The dense path is exact to rounding of a Gram matrix, whose
  // eigenvector error is eps ||G|| / gap ~ 1e-14: 1e-9 on both.
  struct Shape {
    Index n, p;
    bool center, scale;
  };
  // A wide matrix of up to 32 (K + oversample) = 512 samples iterates on its Gram matrix, formed
  // once; a wider one (600 x 1,400) and a tall one apply X twice per block.
  for (const Shape s : {Shape{300, 700, true, false}, Shape{600, 1400, false, false},
                        Shape{900, 300, true, true}, Shape{300, 700, true, true}}) {
    const Index k = 6;
    const pare::Matrix data = decaying(s.n, s.p, 7 + static_cast<std::uint64_t>(s.n));
    pare::Matrix xk = data, xd = data;
    pare::ProjectionOptions o;
    o.components = k;
    o.center = s.center;
    o.scale = s.scale;
    const pare::Projection krylov = pare::truncated_pca(xk, o);
    o.oversample = 300;
    const pare::Projection dense = pare::truncated_pca(xd, o);
    INFO(s.n << " x " << s.p << (s.center ? " centred" : " uncentred") << (s.scale ? " scaled" : "")
             << ": Krylov " << krylov.iterations << " blocks, residual " << krylov.residual << " ("
             << krylov.precision << ")");
    REQUIRE(krylov.method == (s.n <= s.p && s.n <= 512 ? "block Krylov on the Gram matrix" : "block Krylov"));
    REQUIRE(krylov.precision == "double");  // n p < 2^24
    REQUIRE(dense.method == "dense");
    REQUIRE(xk == xd);  // the same analysed matrix
    const Reference ref = gram_reference(xd, k);
    for (Index c = 0; c < k; ++c) {
      INFO("sigma" << c + 1 << ": Krylov " << krylov.singular_values(c) << ", dense "
                   << dense.singular_values(c) << ", reference " << ref.sigma(c));
      REQUIRE(krylov.singular_values(c) == Approx(ref.sigma(c)).epsilon(1e-9));
      REQUIRE(dense.singular_values(c) == Approx(ref.sigma(c)).epsilon(1e-9));
    }
    const double dk = loading_difference(krylov.loadings, ref.v),
                 dd = loading_difference(dense.loadings, ref.v);
    const double ak = largest_angle_sine(ref.v, krylov.loadings),
                 ad = largest_angle_sine(ref.v, dense.loadings);
    INFO("loadings vs reference: Krylov " << dk << " (angle sine " << ak << "), dense " << dd
                                          << " (" << ad << ")");
    REQUIRE(dk <= 1e-5);
    REQUIRE(ak <= 1e-5);
    REQUIRE(dd <= 1e-9);
    REQUIRE(ad <= 1e-9);
    check_internal_consistency(krylov, xk);
    check_internal_consistency(dense, xd);
  }
}

TEST_CASE("a wide matrix past 2^24 cells runs block Krylov on its float Gram matrix", "[projection]") {
  // 300 x 56,000 (n p > 2^24: float products) with K + oversample = 30, so n <= 16 blocks: the
  // n x n Gram matrix is formed once from float products (each within about 3e-6 relative) and
  // the final Rayleigh-Ritz step is in double. Reference: the dense path on the same data (the
  // eigensolver on X X^T formed in double; oversample 300 forces it). Tolerances: the float
  // Gram matrix perturbs the Krylov space by about 1e-6 and Krylov stops at residuals of 3e-5 x
  // theta_1 in float mode, so loadings agree to 1e-4; singular values come from the double
  // Rayleigh-Ritz step, second order in those errors, relative to the largest: 1e-6 relative for
  // the small trailing ones (sigma_20 is about 1/60 of sigma_1 here; measured 4e-8).
  const Index n = 300, p = 56000, k = 20;
  const pare::Matrix data = decaying(n, p, 21);
  pare::Matrix xg = data, xd = data;
  pare::ProjectionOptions o;
  o.components = k;
  const pare::Projection gram = pare::truncated_pca(xg, o);
  o.oversample = 300;
  const pare::Projection dense = pare::truncated_pca(xd, o);
  INFO("Gram path: " << gram.iterations << " blocks, residual " << gram.residual);
  REQUIRE(gram.method == "block Krylov on the Gram matrix");
  REQUIRE(gram.precision == "float");
  REQUIRE(dense.method == "dense");
  for (Index c = 0; c < k; ++c) {
    INFO("sigma" << c + 1 << ": Gram path " << gram.singular_values(c) << ", dense " << dense.singular_values(c));
    REQUIRE(gram.singular_values(c) == Approx(dense.singular_values(c)).epsilon(1e-6));
  }
  REQUIRE(loading_difference(gram.loadings, dense.loadings) <= 1e-4);
  check_internal_consistency(gram, xg);
}

TEST_CASE("wide and tall shapes, dense path, K = min(n, p)", "[projection]") {
  // Reference: the p x p Gram eigensolver as above. For a wide matrix the dense path
  // decomposes X X^T (n x n), for a tall one X^T X, so this compares the two sides. Tolerances:
  // sigma 1e-9 relative and loadings 1e-8 for the leading components (well separated, Gram
  // rounding ~1e-14 / gap). With K = min(n, p) the trailing components of a centred matrix have
  // tiny or zero sigma; there only the singular values are compared, to 1e-7 x sigma_1 (the
  // sqrt(eps) floor of a Gram-matrix method).
  struct Shape {
    Index n, p, k;
    bool center;
  };
  for (const Shape s : {Shape{40, 120, 8, true}, Shape{120, 40, 8, true}, Shape{40, 120, 40, false},
                        Shape{120, 40, 40, true}, Shape{30, 30, 30, true}}) {
    pare::Matrix x = decaying(s.n, s.p, 11 + static_cast<std::uint64_t>(s.p), 60, 0.05);
    const pare::Matrix raw = x;
    pare::ProjectionOptions o;
    o.components = s.k;
    o.center = s.center;
    const pare::Projection pr = pare::truncated_pca(x, o);
    INFO(s.n << " x " << s.p << " K " << s.k << (s.center ? " centred" : " uncentred"));
    REQUIRE(pr.method == "dense");
    REQUIRE(pr.scores.rows() == s.n);
    REQUIRE(pr.scores.cols() == s.k);
    REQUIRE(pr.loadings.rows() == s.p);
    REQUIRE(pr.loadings.cols() == s.k);
    const Reference ref = gram_reference(x, s.k);
    for (Index c = 0; c < s.k; ++c) {
      INFO("sigma" << c + 1 << " " << pr.singular_values(c) << ", reference " << ref.sigma(c));
      REQUIRE(std::abs(pr.singular_values(c) - ref.sigma(c)) <=
              std::max(1e-9 * ref.sigma(c), 1e-7 * ref.sigma(0)));
    }
    const Index lead = std::min<Index>(s.k, 8);
    const double d = loading_difference(pr.loadings.leftCols(lead), ref.v.leftCols(lead));
    INFO("leading loadings vs reference " << d);
    REQUIRE(d <= 1e-8);
    check_internal_consistency(pr, x);
    if (s.center) {
      // The analysed matrix is centred: each cell is (x - mean) rounded to float32 (error <=
      // 2^-24 |z|), and the mean in double is off by ~n eps |mean|, so a column's mean is at most
      // 2^-24 mean|z| + n eps |mean|; allowed twice that (1e-13 |mean| for n <= 120).
      for (Index j = 0; j < s.p; ++j) {
        const VectorXd z = x.col(j).cast<double>();
        INFO("feature " << j << " mean after centring " << z.mean() << " (centre " << pr.center(j)
                        << ")");
        REQUIRE(std::abs(z.mean()) <=
                std::ldexp(z.cwiseAbs().mean(), -23) + 1e-13 * std::abs(pr.center(j)));
      }
    }
  }
}

TEST_CASE("block Krylov on a flat spectrum meets its tolerance or computes exactly",
          "[projection]") {
  // Pure noise has no spectral gaps to speak of (Marchenko-Pastur bulk), the hardest case for a
  // Krylov method. projection.h promises every Ritz residual <= tolerance x the largest
  // eigenvalue, or Error(kOther). 300 x 1000 Gaussian noise, K = 6, block 16: 300 / 16 is not
  // whole, so after 18 blocks (288 columns) no further block fits. With the default tolerance
  // 1e-7 the iteration converges first; with 1e-12 it cannot, and the result must still meet
  // the tolerance (pare then computes exactly). Reference: the Gram eigensolver; sigma to 1e-9
  // relative (||r||^2 / gap is far below that once ||r|| <= 1e-7 theta_1, even with
  // neighbouring sigmas ~1% apart) and the subspace of the 6 loadings to an angle sine of 1e-4
  // (vector error ||r|| / gap <= 1e-7 / 1e-2 in the worst case, and below 1e-9 when exact).
  std::mt19937_64 gen(2024);
  std::normal_distribution<float> normal(0.0f, 1.0f);
  pare::Matrix data(300, 1000);
  for (Index j = 0; j < data.cols(); ++j)
    for (Index i = 0; i < data.rows(); ++i) data(i, j) = normal(gen);
  pare::Matrix analysed;  // the centred matrix: the same for both tolerances (checked)
  Reference ref;
  for (const double tolerance : {1e-7, 1e-12}) {
    pare::Matrix x = data;
    pare::ProjectionOptions o;
    o.components = 6;
    o.oversample = 10;
    o.max_iterations = 100;
    o.tolerance = tolerance;
    const pare::Projection pr = pare::truncated_pca(x, o);
    if (analysed.size() == 0) {
      analysed = x;
      ref = gram_reference(x, 6);
    }
    REQUIRE(x == analysed);
    INFO("tolerance " << tolerance << ": " << pr.method << ", " << pr.iterations
                      << " blocks, residual " << pr.residual);
    REQUIRE(pr.iterations > 0);  // the Krylov path ran
    REQUIRE(pr.residual <= tolerance);
    for (Index c = 0; c < 6; ++c) {
      INFO("sigma" << c + 1 << " " << pr.singular_values(c) << ", reference " << ref.sigma(c));
      REQUIRE(pr.singular_values(c) == Approx(ref.sigma(c)).epsilon(1e-9));
    }
    const double angle = largest_angle_sine(ref.v, pr.loadings);
    INFO("angle sine " << angle);
    REQUIRE(angle <= 1e-4);
    check_internal_consistency(pr, x);
  }
}

TEST_CASE("K out of range is a usage error naming the limit", "[projection]") {
  // SPEC §6: a bad option value is a usage error (exit code 2); projection.h: 1 <= K <= min(n, p).
  for (const auto& [n, p] : {std::pair<Index, Index>{6, 9}, std::pair<Index, Index>{9, 6}}) {
    for (const std::int64_t k : {std::int64_t{0}, std::int64_t{7}, std::int64_t{-1}}) {
      pare::Matrix x = decaying(n, p, 3, 4);
      pare::ProjectionOptions o;
      o.components = k;
      INFO(n << " x " << p << " K " << k);
      try {
        (void)pare::truncated_pca(x, o);
        FAIL("no error for K = " << k);
      } catch (const pare::Error& e) {
        const std::string message = e.what();
        INFO(message);
        REQUIRE(e.kind() == pare::ErrorKind::kUsage);
        REQUIRE(message.find("min(samples, features) = 6") != std::string::npos);
        REQUIRE(message.find("`components` " + std::to_string(k)) != std::string::npos);
      }
    }
  }
}

TEST_CASE("no convergence is a status, and a run that needs the PCA stops on it", "[projection]") {
  // Three Krylov blocks (of 8 columns, for K + 10 = 15 Ritz vectors) and a tolerance no
  // floating-point residual can meet: truncated_pca returns with converged false and says how far
  // it got (projection.h), without throwing.
  pare::Matrix x = decaying(300, 700, 5);
  pare::ProjectionOptions o;
  o.components = 5;
  o.max_iterations = 3;
  o.tolerance = 1e-300;
  pare::Matrix copy = x;
  const pare::Projection pr = pare::truncated_pca(copy, o);
  REQUIRE_FALSE(pr.converged);
  REQUIRE(pr.status.find("did not converge") != std::string::npos);
  REQUIRE(pr.status.find("largest relative residual") != std::string::npos);
  REQUIRE(pr.iterations == 3);
  REQUIRE(pr.residual > 0);
  REQUIRE(pr.scores.size() == 0);
  // One block of 8 columns never holds the 15 Ritz vectors a check needs: the status says so.
  o.max_iterations = 1;
  copy = x;
  const pare::Projection short_space = pare::truncated_pca(copy, o);
  REQUIRE_FALSE(short_space.converged);
  REQUIRE(short_space.status.find("narrower than the 15 Ritz vectors") != std::string::npos);
  // run_pipeline turns it into an error naming the options that help.
  pare::FeatureTable table;
  table.values.resize(300, 700);
  table.values = decaying(300, 700, 5);
  for (Index j = 0; j < 700; ++j) table.feature_names.push_back("f" + std::to_string(j));
  for (Index i = 0; i < 300; ++i) table.sample_ids.push_back("s" + std::to_string(i));
  pare::PipelineOptions run;
  run.select = false;
  run.projection = o;
  try {
    (void)pare::run_pipeline(table, run);
    FAIL("no error");
  } catch (const pare::Error& e) {
    INFO(e.what());
    REQUIRE(e.kind() == pare::ErrorKind::kOther);
    REQUIRE(std::string(e.what()).find("did not converge") != std::string::npos);
    REQUIRE(std::string(e.what()).find("`max_iterations`") != std::string::npos);
  }
}

TEST_CASE("results are bit-identical for 1 and 2 threads", "[projection]") {
  // SPEC §5: outputs must not depend on --threads. Dense (wide and tall) and block Krylov (wide
  // on the Gram matrix, wide with two products per block, tall), centred and scaled: every output
  // compared bit for bit.
  struct Case {
    Index n, p, k;
  };
  for (const Case c : {Case{60, 500, 5}, Case{500, 60, 5}, Case{300, 1200, 8}, Case{700, 1400, 8},
                       Case{1500, 300, 8}}) {
    const pare::Matrix data = decaying(c.n, c.p, 99);
    const pare::Projection one = run_pca(data, c.k, true, true, 10, 1);
    const pare::Projection two = run_pca(data, c.k, true, true, 10, 2);
    INFO(c.n << " x " << c.p << " K " << c.k << ": " << one.method);
    REQUIRE(bit_identical(one.scores, two.scores));
    REQUIRE(bit_identical(one.loadings, two.loadings));
    REQUIRE(bit_identical(one.singular_values, two.singular_values));
    REQUIRE(bit_identical(one.ratio, two.ratio));
    REQUIRE(bit_identical(one.center, two.center));
    REQUIRE(bit_identical(one.scale, two.scale));
    REQUIRE(one.iterations == two.iterations);
  }
}

TEST_CASE("sign convention: the largest-magnitude loading is positive", "[projection]") {
  // SPEC §4. Negating the data flips every singular vector pair; the sign-normalised loadings
  // must come out the same and the scores negated (up to rounding, 1e-9 relative; the dense
  // and Krylov paths both).
  for (const auto& [n, p] : {std::pair<Index, Index>{50, 200}, std::pair<Index, Index>{300, 800}}) {
    const pare::Matrix data = decaying(n, p, 17);
    const pare::Projection a = run_pca(data, 6);
    const pare::Projection b = run_pca(-data, 6);
    INFO(n << " x " << p << " " << a.method);
    REQUIRE(sign_convention_holds(a.loadings));
    REQUIRE(sign_convention_holds(b.loadings));
    REQUIRE((a.loadings - b.loadings).cwiseAbs().maxCoeff() <= 1e-6);
    REQUIRE((a.scores + b.scores).cwiseAbs().maxCoeff() <= 1e-6 * a.scores.cwiseAbs().maxCoeff());
  }
}

TEST_CASE("project_rows reproduces the scores of the training rows", "[projection]") {
  // project_rows centres and scales the raw float32 rows in double; truncated_pca's scores come
  // from the analysed matrix, which holds the same z-values rounded to float32 (relative error
  // <= 2^-24 per cell). By Cauchy-Schwarz with a unit loading vector, each score then differs by
  // at most 2^-24 ||z_row||; allowed: 2^-23 ||z_row|| + 1e-12.
  for (const auto& [center, scale] :
       {std::pair{true, false}, std::pair{true, true}, std::pair{false, false}}) {
    for (const auto& [n, p] :
         {std::pair<Index, Index>{40, 300}, std::pair<Index, Index>{300, 600}}) {
      const pare::Matrix raw = decaying(n, p, 23);
      pare::Matrix x = raw;
      pare::ProjectionOptions o;
      o.components = 5;
      o.center = center;
      o.scale = scale;
      const pare::Projection pr = pare::truncated_pca(x, o);
      const MatrixXd again = pare::project_rows(raw, pr.center, pr.scale, pr.loadings);
      INFO(n << " x " << p << (center ? " centred" : " uncentred") << (scale ? " scaled" : "")
             << ", " << pr.method);
      if (!center) REQUIRE(pr.center == VectorXd::Zero(p));
      if (!scale) REQUIRE(pr.scale == VectorXd::Ones(p));
      double worst = 0;
      for (Index i = 0; i < n; ++i) {
        const double bound = std::ldexp(1.0, -23) * x.row(i).cast<double>().norm() + 1e-12;
        worst = std::max(worst, (again.row(i) - pr.scores.row(i)).cwiseAbs().maxCoeff() / bound);
      }
      INFO("largest difference / bound " << worst);
      REQUIRE(worst <= 1.0);
    }
  }
}

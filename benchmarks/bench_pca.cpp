// Time and accuracy of truncated_pca on a synthetic wide matrix with a decaying spectrum (not run
// by CI).
//
//   build/bench/benchmarks/bench_pca [n=1000] [p=5000] [K=50] [threads=2] [repeats=5] [float]
//   [tolerance]
//
// The matrix is the kind bench_project.py writes: 300 latent components with singular values
// proportional to (i + 1)^-0.8 carrying about 60% of the sum of squares, Gaussian noise for the
// rest, features scaled by factors in [0.5, 3] and shifted by means in [0, 20]. The reference is
// the exact eigendecomposition of the n x n Gram matrix of the centred data in double (Eigen's
// SelfAdjointEigenSolver). Prints the fastest of `repeats` runs, the method, the Krylov blocks and
// the largest relative error of the K eigenvalues.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>

#include <Eigen/Eigenvalues>
#include <Eigen/QR>
#include <Eigen/SVD>

#include "pare/projection.h"

#include "internal/random.h"

int main(int argc, char** argv) {
  const long n = argc > 1 ? std::atol(argv[1]) : 1000;
  const long p = argc > 2 ? std::atol(argv[2]) : 5000;
  const long k = argc > 3 ? std::atol(argv[3]) : 50;
  const int threads = argc > 4 ? std::atoi(argv[4]) : 2;
  const int repeats = argc > 5 ? std::atoi(argv[5]) : 5;
  const bool float_products = argc > 6 && std::atoi(argv[6]) != 0;
  const double tolerance = argc > 7 ? std::atof(argv[7]) : pare::ProjectionOptions{}.tolerance;
  pare::internal::Rng rng(1);
  const long r = std::min<long>(300, std::min(n, p));
  auto normals = [&](long rows, long cols) {
    Eigen::MatrixXd a(rows, cols);
    for (long c = 0; c < cols; ++c)
      for (long i = 0; i < rows; ++i) a(i, c) = rng.normal();
    return a;
  };
  const Eigen::MatrixXd u = Eigen::HouseholderQR<Eigen::MatrixXd>(normals(n, r)).householderQ() *
                            Eigen::MatrixXd::Identity(n, r);
  const Eigen::MatrixXd v = Eigen::HouseholderQR<Eigen::MatrixXd>(normals(p, r)).householderQ() *
                            Eigen::MatrixXd::Identity(p, r);
  Eigen::VectorXd s(r);
  for (long i = 0; i < r; ++i) s(i) = std::pow(1.0 + static_cast<double>(i), -0.8);
  const double noise_sd = std::sqrt(s.squaredNorm() * (0.4 / 0.6) / static_cast<double>(n * p));
  Eigen::MatrixXd x = u * s.asDiagonal() * v.transpose();
  for (long j = 0; j < p; ++j) {
    const double scale = 0.5 + 2.5 * rng.uniform(), mean = 20 * rng.uniform();
    for (long i = 0; i < n; ++i) x(i, j) = (x(i, j) + noise_sd * rng.normal()) * scale * 1e3 + mean;
  }
  const pare::Matrix data = x.cast<float>();

  Eigen::MatrixXd centred = data.cast<double>();
  centred.rowwise() -= centred.colwise().mean();
  const Eigen::MatrixXd gram = centred * centred.transpose();
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> reference(gram);
  const Eigen::VectorXd exact = reference.eigenvalues().reverse() / static_cast<double>(n - 1);
  // The exact scores' directions: the leading K eigenvectors of the Gram matrix.
  const Eigen::MatrixXd exact_u = reference.eigenvectors().rightCols(k).rowwise().reverse();

  pare::ProjectionOptions o;
  o.components = k;
  o.threads = threads;
  o.float_products = float_products;
  o.tolerance = tolerance;
  double best = 1e300;
  pare::Projection pca;
  for (int rep = 0; rep < repeats; ++rep) {
    pare::Matrix copy = data;
    const auto start = std::chrono::steady_clock::now();
    pca = pare::truncated_pca(copy, o);
    best = std::min(
        best, std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }
  double worst = 0;
  for (long c = 0; c < k; ++c)
    worst = std::max(worst, std::abs(pca.eigenvalues(c) - exact(c)) / exact(c));
  // The largest principal angle between the exact and computed K-dimensional score subspaces.
  const Eigen::MatrixXd u_pare = Eigen::HouseholderQR<Eigen::MatrixXd>(pca.scores).householderQ() *
                                 Eigen::MatrixXd::Identity(n, k);
  const Eigen::VectorXd cosines =
      Eigen::JacobiSVD<Eigen::MatrixXd>(exact_u.transpose() * u_pare).singularValues();
  const double angle =
      std::asin(std::min(1.0, std::sqrt(std::max(0.0, 1 - cosines(k - 1) * cosines(k - 1)))));
  std::printf(
      "bench_pca: %ld x %ld, K = %ld, %d threads: %.3f s (fastest of %d), %s, %s products, %d "
      "blocks, "
      "max relative eigenvalue error %.1e, largest principal angle %.1e, gap lambda_K / lambda_K+1 "
      "= %.4f\n",
      n, p, k, threads, best, repeats, pca.method.c_str(), pca.precision.c_str(), pca.iterations,
      worst, angle, exact(k - 1) / exact(k));
  return 0;
}

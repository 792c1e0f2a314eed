#include "pare/projection.h"

#include <Eigen/Eigenvalues>
#include <Eigen/QR>
#include <Eigen/SVD>

#include <algorithm>  // std::min, std::max, std::stable_sort
#include <cmath>      // std::sqrt, std::hypot, std::abs, std::log
#include <limits>     // std::numeric_limits
#include <utility>    // std::move
#include <vector>     // std::vector

#include "internal/columns.h"
#include "internal/omp.h"
#include "internal/random.h"
#include "kernels/kernels.h"
#include "pare/error.h"
#include "pare/progress.h"

namespace pare {

namespace {

using MatD = Eigen::MatrixXd;
using MatF = Eigen::MatrixXf;
using VecD = Eigen::VectorXd;
using Eigen::Index;

// Products go through the dispatched kernels (src/kernels/kernels.h: every entry a sum in a fixed
// order, the same bits on every instruction-set level) in fixed pieces, so that nothing depends on
// --threads either: kPiece columns of x at a time, and X B summed over kGroups fixed groups of
// columns whose partial sums are added in order.
constexpr Index kPiece = 256;
constexpr Index kGroups = 16;

template <typename S>
using Mat = Eigen::Matrix<S, Eigen::Dynamic, Eigen::Dynamic>;

// Column c0 of x onwards, as a kernel operand.
kernels::Operand columns_of(const ConstMatrixRef& x, Index c0) {
  return kernels::columns(x.data() + c0 * x.outerStride(), x.outerStride());
}

// Y = X B (X float n x p; B p x l), in precision S (a double product converts X's values as it
// reads them).
template <typename S>
Mat<S> times(const ConstMatrixRef& x, const Mat<S>& b, int threads) {
  const Index n = x.rows(), p = x.cols(), l = b.cols();
  const Index per_group = ((p + kGroups - 1) / kGroups + kPiece - 1) / kPiece * kPiece;
  const Index groups = (p + per_group - 1) / per_group;
  std::vector<Mat<S>> partial(static_cast<std::size_t>(groups));
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (Index g = 0; g < groups; ++g) {
    Mat<S>& acc = partial[static_cast<std::size_t>(g)];
    acc.setZero(n, l);
    const Index end = std::min(p, (g + 1) * per_group);
    for (Index c0 = g * per_group; c0 < end; c0 += kPiece) {
      const Index w = std::min(kPiece, end - c0);
      kernels::gemm(kernels::Shape{n, l, w}, columns_of(x, c0), kernels::columns(b.data() + c0, p), acc.data(), n,
                    true);
      internal::release_column_span(x, c0, c0 + w - 1);
    }
  }
  Mat<S> y = partial[0];
  for (std::size_t g = 1; g < partial.size(); ++g) y += partial[g];
  return y;
}

// W = X^T Y (X float n x p; Y n x l), in precision S.
template <typename S>
Mat<S> times_t(const ConstMatrixRef& x, const Mat<S>& y, int threads) {
  const Index n = x.rows(), p = x.cols(), l = y.cols();
  Mat<S> w(p, l);
  const Index pieces = (p + kPiece - 1) / kPiece;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (Index k = 0; k < pieces; ++k) {
    const Index c0 = k * kPiece, width = std::min(kPiece, p - c0);
    kernels::gemm(kernels::Shape{width, l, n}, kernels::transposed(columns_of(x, c0)), kernels::columns(y.data(), n),
                  w.data() + c0, p, false);
    internal::release_column_span(x, c0, c0 + width - 1);
  }
  return w;
}

// The lower triangle of X^T X (X float n x p, tall) in double, summed over fixed groups of pieces
// of rows in order. The upper triangle is zero (the eigensolver reads only the lower one).
MatD gram_tall(const ConstMatrixRef& x, int threads) {
  const Index n = x.rows(), p = x.cols();
  const Index per_group = ((n + kGroups - 1) / kGroups + kPiece - 1) / kPiece * kPiece;
  const Index groups = (n + per_group - 1) / per_group;
  std::vector<MatD> partial(static_cast<std::size_t>(groups));
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (Index g = 0; g < groups; ++g) {
    MatD& acc = partial[static_cast<std::size_t>(g)];
    acc.setZero(p, p);
    const Index end = std::min(n, (g + 1) * per_group);
    for (Index r0 = g * per_group; r0 < end; r0 += kPiece) {
      const Index w = std::min(kPiece, end - r0);
      const kernels::Operand rows = kernels::columns(x.data() + r0, x.outerStride());  // w x p
      kernels::gemm(kernels::Shape{p, p, w, true, 0}, kernels::transposed(rows), rows, acc.data(), p, true);
      internal::release_column_span(x, 0, x.cols() - 1);
    }
  }
  MatD g = partial[0];
  for (std::size_t k = 1; k < partial.size(); ++k) g += partial[k];
  return g;
}

// The lower triangle of X X^T (X float n x p, wide) in double, from float or double products:
// pieces of kGramPiece columns taken in order, each piece's product computed over fixed stripes of
// kGramStripe rows (one stripe per task; which entries a task computes does not change them) and
// added to the double sum, so every entry is the same sum in the same order for any number of
// threads. In float, a product of 2,048 terms is within about 3e-6 of its value (relative,
// typically); the final Rayleigh-Ritz step in double (truncated_pca) makes the eigenvalues
// accurate regardless.
constexpr Index kGramPiece = 2048;
constexpr Index kGramStripe = 128;

MatD gram_wide(const ConstMatrixRef& x, bool float_products, int threads) {
  const Index n = x.rows(), p = x.cols();
  MatD g = MatD::Zero(n, n);
  const Index stripes = (n + kGramStripe - 1) / kGramStripe;
  ProgressStep progress("PCA Gram matrix", p, "features");
  for (Index c0 = 0; c0 < p; c0 += kGramPiece) {
    const Index w = std::min(kGramPiece, p - c0);
    const kernels::Operand piece = columns_of(x, c0);  // n x w
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
    for (Index task = 0; task < stripes; ++task) {
      // Stripe s: rows r0..r1 of the lower triangle, columns 0..r1; the longest first, so the
      // threads finish together.
      const Index s = stripes - 1 - task;
      const Index r0 = s * kGramStripe, r1 = std::min(n, r0 + kGramStripe), h = r1 - r0;
      kernels::Operand rows = piece;
      rows.data = x.data() + c0 * x.outerStride() + r0;
      const kernels::Shape lower{h, r1, w, true, r0};
      if (!float_products) {
        kernels::gemm(lower, rows, kernels::transposed(piece), g.data() + r0, n, true);
        continue;
      }
      MatF part(h, r1);
      kernels::gemm(lower, rows, kernels::transposed(piece), part.data(), h, false);
      for (Index j = 0; j < r1; ++j)
        for (Index i = std::max<Index>(0, j - r0); i < h; ++i) g(r0 + i, j) += static_cast<double>(part(i, j));
    }
    internal::release_column_span(x, c0, c0 + w - 1);
    progress.add(w);
  }
  return g;
}

// Double products of the iteration's small matrices, through the kernels too.
kernels::Operand operand(const MatD& a) { return kernels::columns(a.data(), a.rows()); }

// C = A B for operands A (m x k) and B (k x n) as the kernels see them.
MatD product(const kernels::Operand& a, const kernels::Operand& b, Index m, Index n, Index k) {
  MatD c(m, n);
  kernels::gemm(kernels::Shape{m, n, k}, a, b, c.data(), m, false);
  return c;
}

MatD mul(const MatD& a, const MatD& b) { return product(operand(a), operand(b), a.rows(), b.cols(), a.cols()); }

// The same product spread over the threads: the rows of C in fixed stripes, one stripe per task
// (each entry is the same sum, whichever task computes it).
MatD parallel_product(const kernels::Operand& a, const kernels::Operand& b, Index m, Index n, Index k,
                      int threads) {
  constexpr Index kStripe = 64;
  MatD c(m, n);
  const Index stripes = (m + kStripe - 1) / kStripe;
  const bool worth_it = static_cast<double>(m) * static_cast<double>(n) * static_cast<double>(k) > 1e6;
#pragma omp parallel for schedule(static) num_threads(threads) if (worth_it && stripes > 1)
  for (Index s = 0; s < stripes; ++s) {
    const Index r0 = s * kStripe, h = std::min(kStripe, m - r0);
    kernels::Operand rows = a;
    rows.data = static_cast<const char*>(a.data) +
                r0 * a.row_stride * static_cast<Index>(a.single ? sizeof(float) : sizeof(double));
    kernels::gemm(kernels::Shape{h, n, k}, rows, b, c.data() + r0, m, false);
  }
  return c;
}

// A^T B.
MatD mul_tn(const MatD& a, const MatD& b) {
  return product(kernels::transposed(operand(a)), operand(b), a.cols(), b.cols(), a.rows());
}

// The leading k singular triplets of a tall, skinny W (rows >> columns): the eigenvectors of
// W^T W (columns x columns) give V and sigma^2, and U = W V / sigma, about a tenth of the time of
// a bidiagonal SVD of W at 46,561 x 60. Forming W^T W squares the condition number, so when
// sigma_k^2 < 1e-8 sigma_1^2 (relative errors near 1e-8 on sigma_k) W is decomposed directly.
struct Triplets {
  VecD sigma;
  MatD u, v;
};

Triplets leading_svd(const MatD& w, Index k) {
  Triplets t;
  const MatD cross = mul_tn(w, w);
  Eigen::SelfAdjointEigenSolver<MatD> es(cross);
  if (es.info() == Eigen::Success) {
    const VecD values = es.eigenvalues().reverse();
    if (values(0) > 0 && values(k - 1) > 1e-8 * values(0)) {
      t.v = es.eigenvectors().rightCols(k).rowwise().reverse();
      t.sigma = values.head(k).cwiseSqrt();
      t.u = mul(w, t.v) * t.sigma.cwiseInverse().asDiagonal();
      return t;
    }
  }
  Eigen::BDCSVD<MatD> svd(w, Eigen::ComputeThinU | Eigen::ComputeThinV);
  t.sigma = svd.singularValues().head(k);
  t.u = svd.matrixU().leftCols(k);
  t.v = svd.matrixV().leftCols(k);
  return t;
}

MatD orthonormal_columns(const MatD& a) {
  Eigen::HouseholderQR<MatD> qr(a);
  return qr.householderQ() * MatD::Identity(a.rows(), a.cols());
}

// The eigenpairs of the Krylov iteration's symmetric T, in two parts: T = Q S Q^T with S
// tridiagonal (Householder reflections: Eigen's Tridiagonalization), then S = Z L Z^T by the
// implicit QR algorithm with Wilkinson shifts (Golub & Van Loan, Matrix Computations, 4th ed.,
// Algorithms 8.3.2 and 8.3.3), Z a product of plane rotations. The rotations depend on S alone, so
// they are recorded once and applied to any rows of Q: the iteration needs only the last rows of
// the leading eigenvectors Q Z for its residuals, and whole vectors once, at convergence.
// Accumulating all of Q Z at every step, as a general eigensolver does, was most of the cost of
// the iteration's small matrices.
class RitzPairs {
 public:
  explicit RitzPairs(const MatD& t) : tri_(t) {
    const Index n = t.rows();
    VecD d = tri_.diagonal(), e = tri_.subDiagonal();
    ok_ = qr_iteration(d, e);
    values_.resize(n);
    order_.resize(static_cast<std::size_t>(n));
    for (Index i = 0; i < n; ++i) order_[static_cast<std::size_t>(i)] = i;
    // Largest first; equal values in their order on the diagonal.
    std::stable_sort(order_.begin(), order_.end(), [&](Index a, Index b) { return d(a) > d(b); });
    for (Index i = 0; i < n; ++i) values_(i) = d(order_[static_cast<std::size_t>(i)]);
  }

  /// False when an eigenvalue did not converge (30 n QR steps).
  bool ok() const { return ok_; }
  /// The eigenvalues, largest first.
  const VecD& values() const { return values_; }

  /// Rows first .. first + count - 1 of the leading `vectors` eigenvectors (count x vectors).
  MatD rows(Index first, Index count, Index vectors) const {
    const Index n = values_.size();
    MatD q;
    if (first == 0 && count == n) {
      q = tri_.matrixQ();
    } else {
      // E^T Q = (Q^T E)^T for E those columns of the identity: count n-vectors through the
      // reflections, not n.
      MatD e = MatD::Zero(n, count);
      for (Index i = 0; i < count; ++i) e(first + i, i) = 1;
      q = (tri_.matrixQ().transpose() * e).transpose();
    }
    for (std::size_t sweep = 0; sweep < sweep_first_.size(); ++sweep) {
      const std::size_t at = sweep_at_[sweep];
      kernels::rotate_columns(q.data(), q.rows(), q.rows(), sweep_first_[sweep], cosines_.data() + at,
                              sines_.data() + at, sweep_count_[sweep]);
    }
    MatD out(count, vectors);
    for (Index c = 0; c < vectors; ++c) out.col(c) = q.col(order_[static_cast<std::size_t>(c)]);
    return out;
  }

 private:
  // The implicit QR iteration on the tridiagonal matrix with diagonal d and subdiagonal e: d ends
  // as the eigenvalues; each step's rotations are recorded.
  bool qr_iteration(VecD& d, VecD& e) {
    const Index n = d.size();
    const double eps = std::numeric_limits<double>::epsilon(), tiny = std::numeric_limits<double>::min();
    Index end = n - 1;  // the trailing rows past `end` have converged
    std::int64_t steps = 0;
    while (end > 0) {
      // A subdiagonal entry within eps of its neighbours on the diagonal is taken as 0 (8.3.3).
      for (Index i = 0; i < end; ++i)
        if (std::abs(e(i)) <= eps * (std::abs(d(i)) + std::abs(d(i + 1))) || std::abs(e(i)) < tiny) e(i) = 0;
      while (end > 0 && e(end - 1) == 0) --end;
      if (end == 0) break;
      Index start = end - 1;  // the unreduced block start .. end
      while (start > 0 && e(start - 1) != 0) --start;
      if (++steps > 30 * n) return false;
      // The Wilkinson shift: the eigenvalue of the trailing 2 x 2 block nearer its last entry.
      const double half = (d(end - 1) - d(end)) / 2, b = e(end - 1);
      const double root = std::hypot(half, b);
      const double mu = d(end) - b * (b / (half + (half >= 0 ? root : -root)));
      // Chase the bulge: rotation k in the plane (k, k + 1) zeroes z against x.
      double x = d(start) - mu, z = e(start);
      sweep_first_.push_back(start);
      sweep_count_.push_back(end - start);
      sweep_at_.push_back(cosines_.size());
      for (Index k = start; k < end; ++k) {
        double c = 1, s = 0;  // G^T (x, z) = (r, 0) for G = [c s; -s c]
        if (z != 0) {
          if (std::abs(z) > std::abs(x)) {
            const double tau = -x / z;
            s = 1 / std::sqrt(1 + tau * tau);
            c = s * tau;
          } else {
            const double tau = -z / x;
            c = 1 / std::sqrt(1 + tau * tau);
            s = c * tau;
          }
        }
        if (k > start) e(k - 1) = c * x - s * z;
        // G^T [a b; b f] G on the diagonal block, and the next bulge below it.
        const double a = d(k), bk = e(k), f = d(k + 1);
        d(k) = a * c * c - 2 * bk * c * s + f * s * s;
        d(k + 1) = a * s * s + 2 * bk * c * s + f * c * c;
        e(k) = (a - f) * c * s + bk * (c * c - s * s);
        if (k + 1 < end) {
          z = -s * e(k + 1);
          e(k + 1) = c * e(k + 1);
        }
        x = e(k);
        cosines_.push_back(c);
        sines_.push_back(s);
      }
    }
    return true;
  }

  Eigen::Tridiagonalization<MatD> tri_;
  VecD values_;
  std::vector<Index> order_;  // positions on the diagonal, largest eigenvalue first
  // The rotations: QR step i rotates the planes (f, f + 1), ..., (f + c - 1, f + c) for
  // f = sweep_first_[i], c = sweep_count_[i], with cosines_ and sines_ from sweep_at_[i] on.
  std::vector<Index> sweep_first_, sweep_count_;
  std::vector<std::size_t> sweep_at_;
  std::vector<double> cosines_, sines_;
  bool ok_ = true;
};

// Centres and scales `x` in place, column by column, in double, recording out.center and
// out.scale; returns the squared Frobenius norm of the result. On disk a thread gives back a 2 MiB
// window when its walk leaves it (releasing each column would drop the window its next column is
// in).
double standardise_columns(MatrixRef x, const ProjectionOptions& o, int threads, Projection& out) {
  const Index n = x.rows(), p = x.cols();
  VecD squares(p);
#pragma omp parallel num_threads(threads)
  {
    internal::WindowWalk walk(static_cast<std::size_t>(n) * sizeof(float));
#pragma omp for schedule(dynamic, 64)
    for (Index j = 0; j < p; ++j) {
      float* col = x.col(j).data();
      double mean = 0;
      if (o.center) {
        double sum = 0;
        for (Index i = 0; i < n; ++i) sum += static_cast<double>(col[i]);
        mean = sum / static_cast<double>(n);
      }
      double ss = 0;
      for (Index i = 0; i < n; ++i) {
        const double d = static_cast<double>(col[i]) - mean;
        ss += d * d;
      }
      double sd = 1;
      if (o.scale) {
        sd = std::sqrt(ss / static_cast<double>(n - 1));
        if (!(sd > 0)) sd = 1;  // a constant column stays all zero
      }
      for (Index i = 0; i < n; ++i) col[i] = static_cast<float>((static_cast<double>(col[i]) - mean) / sd);
      out.center(j) = mean;
      out.scale(j) = sd;
      double stored = 0;
      for (Index i = 0; i < n; ++i) stored += static_cast<double>(col[i]) * static_cast<double>(col[i]);
      squares(j) = stored;
      walk.visited(col);
    }
  }
  double frobenius2 = 0;
  for (Index j = 0; j < p; ++j) frobenius2 += squares(j);
  return frobenius2;
}

// The leading singular values with the scores (U Sigma, n x k) and loadings (V, p x k) before the
// sign convention.
struct Factors {
  VecD sigma;
  MatD scores, loadings;
};

// The exact eigendecomposition of the short side's Gram matrix, in double.
Factors dense_pca(const ConstMatrixRef& x, bool wide, Index k, int threads, Projection& out) {
  const Index p = x.cols();
  out.method = "dense";
  out.precision = "double";
  out.residual = 0;
  Factors f;
  // The lower triangle of the short side's Gram matrix (the upper one is zero).
  const MatD g = wide ? gram_wide(x, false, threads) : gram_tall(x, threads);
  Eigen::SelfAdjointEigenSolver<MatD> es(g);
  if (es.info() != Eigen::Success) throw Error(ErrorKind::kOther, "PCA: the eigensolver failed");
  MatD vectors = es.eigenvectors().rightCols(k).rowwise().reverse();
  f.sigma = es.eigenvalues().tail(k).reverse().cwiseMax(0.0).cwiseSqrt();
  if (wide) {
    const MatD w = times_t<double>(x, vectors, threads);  // X^T U = V Sigma
    f.loadings = MatD::Zero(p, k);
    for (Index c = 0; c < k; ++c) {
      const double norm = w.col(c).norm();
      if (norm > 0) f.loadings.col(c) = w.col(c) / norm;
    }
    f.scores = vectors * f.sigma.asDiagonal();
  } else {
    f.loadings = vectors;
    f.scores = times<double>(x, f.loadings, threads);
  }
  return f;
}

// The short side's Gram operator M = X X^T (wide) or X^T X (tall), applied as two products with X
// (in float or double), never formed; or, with `use_gram` (wide), formed once in double (from
// float or double products) and applied as one product.
class GramOperator {
 public:
  GramOperator(const ConstMatrixRef& x, bool wide, bool use_float, bool use_gram, int threads)
      : x_(x), wide_(wide), use_float_(use_float), use_gram_(use_gram), threads_(threads) {
    if (use_gram_) {
      g_ = gram_wide(x_, use_float_, threads_);
      g_.triangularView<Eigen::StrictlyUpper>() = g_.transpose();
    }
  }

  // M Q.
  MatD apply(const MatD& q) const {
    if (use_gram_) {
      const Index n = x_.rows();
      return parallel_product(operand(g_), operand(q), n, q.cols(), n, threads_);
    }
    if (use_float_) {
      const MatF qf = q.cast<float>();
      const MatF y = wide_ ? times<float>(x_, times_t<float>(x_, qf, threads_), threads_)
                           : times_t<float>(x_, times<float>(x_, qf, threads_), threads_);
      return y.cast<double>();
    }
    return wide_ ? times<double>(x_, times_t<double>(x_, q, threads_), threads_)
                 : times_t<double>(x_, times<double>(x_, q, threads_), threads_);
  }

 private:
  const ConstMatrixRef& x_;
  bool wide_, use_float_, use_gram_;
  int threads_;
  MatD g_;  // with use_gram: X X^T
};

// The first block of the Krylov space: `block` normal columns from the seed, orthonormalised.
MatD start_block(Index m, Index block, std::uint64_t seed) {
  internal::Rng rng(seed, 0x5043);
  MatD start(m, block);
  for (Index c = 0; c < block; ++c)
    for (Index i = 0; i < m; ++i) start(i, c) = rng.normal();
  return orthonormal_columns(start);
}

// The Krylov basis: orthonormal columns [0, used) of `v`, grown block by block, and the projected
// matrix T = V^T M V over every column but the newest block's (M times the newest block is the
// next iteration's product).
struct KrylovBasis {
  MatD v;          // m x capacity
  Index used = 0;  // columns in use
  Index last = 0;  // width of the newest block: columns [used - last, used)
  MatD t;          // (used - last) x (used - last)

  kernels::Operand columns() const { return kernels::columns(v.data(), v.rows()); }
  MatD newest() const { return v.middleCols(used - last, last); }
  void append(const MatD& block) {
    v.middleCols(used, block.cols()) = block;
    used += block.cols();
    last = block.cols();
  }
};

// V^T A over the basis columns in use (used x a.cols()).
MatD basis_tn(const KrylovBasis& kb, const MatD& a, int threads) {
  return parallel_product(kernels::transposed(kb.columns()), operand(a), kb.used, a.cols(), kb.v.rows(), threads);
}

// A minus V C over the basis columns in use.
void subtract_basis(const KrylovBasis& kb, const MatD& c, MatD& a, int threads) {
  a -= parallel_product(kb.columns(), operand(c), kb.v.rows(), c.cols(), kb.used, threads);
}

// One block Krylov iteration: `y` = M times the newest block is orthogonalised against the whole
// basis (two passes, each one product with all basis columns), its coefficients extend T by the
// newest block's row and column, and the QR of the remainder gives the next block and its R
// factor (the residuals' source).
struct KrylovStep {
  MatD next;  // the next block, orthonormal and orthogonal to the basis
  MatD r;     // R = next^T y for the orthogonalised y
};

KrylovStep extend_basis(KrylovBasis& kb, MatD y, int threads) {
  const Index w = kb.last, old = kb.used - w;
  MatD coef = MatD::Zero(kb.used, y.cols());
  for (int pass = 0; pass < 2; ++pass) {
    const MatD c = basis_tn(kb, y, threads);
    subtract_basis(kb, c, y, threads);
    coef += c;
  }
  MatD grown(kb.used, kb.used);
  grown.topLeftCorner(old, old) = kb.t;
  grown.rightCols(w) = coef;
  grown.bottomLeftCorner(w, old) = coef.topRows(old).transpose();
  const MatD diagonal = coef.bottomRows(w);
  grown.bottomRightCorner(w, w) = (diagonal + diagonal.transpose()) / 2;
  kb.t.swap(grown);

  KrylovStep step;
  step.next = orthonormal_columns(y);
  step.r = mul_tn(step.next, y);
  // Guard against a nearly invariant space: make the new block orthogonal again.
  subtract_basis(kb, basis_tn(kb, step.next, threads), step.next, threads);
  step.next = orthonormal_columns(step.next);
  return step;
}

// The convergence test: the largest residual ||R s_last|| of the leading k Ritz pairs relative to
// the largest Ritz value, s_last the rows of a Ritz vector's coordinates (largest first) on the
// newest block.
double ritz_residual(const RitzPairs& pairs, const MatD& r, const KrylovBasis& kb, Index k) {
  const VecD& theta = pairs.values();
  const MatD tail = pairs.rows(kb.used - kb.last, kb.last, k);
  double worst = 0;
  const double top = std::max(theta(0), 1e-300);
  for (Index c = 0; c < k; ++c) worst = std::max(worst, (r * tail.col(c)).norm() / top);
  return worst;
}

// The leading `count` Ritz vectors (m x count): the basis times their coordinates.
MatD ritz_vectors(const RitzPairs& pairs, const KrylovBasis& kb, Index count, int threads) {
  const MatD svec = pairs.rows(0, kb.used, count);
  return parallel_product(kb.columns(), operand(svec), kb.v.rows(), count, kb.used, threads);
}

// The final Rayleigh-Ritz step in double: the SVD of X^T U (wide) or X U (tall) on the Ritz space.
Factors rayleigh_ritz(const ConstMatrixRef& x, const MatD& ritz, bool wide, Index k, int threads) {
  Factors f;
  if (wide) {
    const Triplets svd = leading_svd(times_t<double>(x, ritz, threads), k);  // of X^T U, p x block
    f.sigma = svd.sigma;
    f.loadings = svd.u;
    // X V, not U W Sigma: the scores are the analysed matrix times the loadings to rounding, not
    // to the Ritz residual (so apply reproduces them).
    f.scores = times<double>(x, f.loadings, threads);
  } else {
    const Triplets svd = leading_svd(times<double>(x, ritz, threads), k);  // of X U, n x block
    f.sigma = svd.sigma;
    f.scores = svd.u * f.sigma.asDiagonal();
    f.loadings = mul(ritz, svd.v);
  }
  return f;
}

enum class KrylovEnd {
  kConverged,     // the factors are set
  kExhausted,     // the space cannot grow to meet the tolerance: compute densely instead
  kNotConverged,  // max_iterations reached: out.status says how far it got
};

// Block Krylov (block Lanczos with full reorthogonalisation) on the short side's Gram operator
// M = X X^T (wide) or X^T X (tall). Each new block is M times the last one, orthogonalised against
// all earlier blocks; the coefficients give the Rayleigh quotient T = Q^T M Q directly, and the QR
// factor R of the remainder gives the exact residual of every Ritz pair (theta, Q s): ||R s_last||
// (Golub & Van Loan, Matrix Computations, 4th ed., §10.3.6). A block Krylov space reaches a given
// accuracy in far fewer passes over the data than subspace (power) iteration, and each pass is two
// matrix products that run at GEMM speed, which is why it beats both Lanczos with single vectors
// (memory-bound matrix-vector products) and randomized subspace iteration here (see
// notebooks-free-docs/numerics.md). Large matrices iterate with float32 products; the final
// Rayleigh-Ritz step, on the leading `keep` = K + oversample Ritz vectors, is in double.
KrylovEnd krylov_pca(const ConstMatrixRef& x, const ProjectionOptions& o, Index keep, int threads, Projection& out,
                     Factors& f) {
  const Index n = x.rows(), p = x.cols(), m = std::min(n, p), k = o.components;
  const bool wide = n <= p;
  out.method = "block Krylov";
  const bool use_float =
      o.float_products || static_cast<double>(n) * static_cast<double>(p) > static_cast<double>(Index{1} << 24);
  out.precision = use_float ? "float" : "double";
  const double tolerance = use_float ? std::max(o.tolerance, 3e-5) : o.tolerance;
  // A wide matrix of up to 32 `keep`s of samples: its Gram matrix X X^T is formed once
  // (n^2 p / 2 products), which costs less than the two products per Krylov block (2 n p b each)
  // over the usual space of four or more `keep`s of columns (n / 2 < 16 keep); the blocks then
  // multiply by the n x n Gram matrix.
  const bool use_gram = wide && n <= 32 * keep;
  if (use_gram) out.method = "block Krylov on the Gram matrix";
  const GramOperator op(x, wide, use_float, use_gram, threads);
  // Block width: on the Gram matrix a product costs little, and narrow blocks (a quarter of
  // `keep`, 8 to 16 columns) reach the tolerance in a smaller space, which keeps the eigenproblems
  // of T small: at 1,000 x 5,000 and K = 50, 22 blocks of 15 columns against 11 of 60, in a
  // quarter of the time. Applied as two products with X, every block is a pass over the data, so
  // one block holds all `keep` columns (fewer passes). The `block` option overrides both.
  const Index block = o.block > 0             ? std::min<Index>(o.block, keep)
                      : use_gram              ? std::min<Index>(keep, std::clamp<Index>((keep + 3) / 4, 8, 16))
                                              : keep;

  // By default the space may grow to 60 `keep`s of columns; it stops short of the short side.
  const Index max_blocks = o.max_iterations > 0 ? o.max_iterations : (60 * keep + block - 1) / block;
  KrylovBasis kb;
  kb.v.resize(m, std::min(m, 4 * keep + block));
  kb.append(start_block(m, block, o.seed));
  ProgressStep progress("PCA", 0, "blocks");  // how many it takes is not known in advance
  bool checked = false;
  // On the Gram matrix, checks are skipped while the residuals' geometric decay says the tolerance
  // is still far: the next check comes after half the blocks the last two checks predict, and at
  // most a quarter of the blocks so far later (a check solves the eigenproblem of T, whose cost
  // grows with the cube of the space, and the blocks are cheap). With two products per block every
  // block is checked: a block costs more than a check.
  Index next_check = 0, last_check = 0;
  double last_residual = 0;
  for (Index it = 1; it <= max_blocks; ++it) {
    progress.add(1);
    KrylovStep step = extend_basis(kb, op.apply(kb.newest()), threads);
    out.iterations = static_cast<int>(it);
    if (kb.used >= keep && (it >= next_check || kb.used + block > m || it == max_blocks)) {
      // enough Ritz pairs to test and to keep
      const RitzPairs pairs(kb.t);
      if (!pairs.ok()) throw Error(ErrorKind::kOther, "PCA: the eigensolver failed");
      out.residual = ritz_residual(pairs, step.r, kb, k);
      checked = true;
      if (out.residual <= tolerance) {
        f = rayleigh_ritz(x, ritz_vectors(pairs, kb, keep, threads), wide, k, threads);
        return KrylovEnd::kConverged;
      }
      next_check = it + 1;
      if (last_check > 0 && out.residual < last_residual) {
        const double rate = std::log(out.residual / last_residual) / static_cast<double>(it - last_check);
        const double to_go = std::log(tolerance / out.residual) / rate;
        // Early residuals can stall and then fall fast, so a jump is at most a quarter of the
        // blocks so far: the overshoot past convergence stays within that.
        if (use_gram && to_go >= 4) next_check = it + std::min(static_cast<Index>(to_go / 2), std::max<Index>(1, it / 4));
      }
      last_check = it;
      last_residual = out.residual;
    }
    // Another block no longer fits beside the basis, so the Krylov space cannot grow to meet the
    // tolerance: compute exactly instead. By now the iteration has cost about as much as the
    // dense method.
    if (kb.used + block > m) return KrylovEnd::kExhausted;
    if (kb.used + block > kb.v.cols()) kb.v.conservativeResize(m, std::min(m, 2 * kb.v.cols()));
    kb.append(step.next);
  }
  // A status, not an error: the caller decides (a run stops, the sample screen goes without).
  out.converged = false;
  out.status = "PCA did not converge: after " + std::to_string(max_blocks) + " Krylov blocks of " +
               std::to_string(block) + " columns ";
  out.status += checked ? "the largest relative residual is " + std::to_string(out.residual) + " (tolerance " +
                              std::to_string(tolerance) + ")"
                        : "the space is still narrower than the " + std::to_string(keep) + " Ritz vectors needed";
  return KrylovEnd::kNotConverged;
}

// Sign convention (SPEC §4): the loading of largest magnitude is positive in every component.
// Then the factors go into `out` with the variance each component explains.
void orient_and_explain(Factors f, double frobenius2, Index n, Projection& out) {
  const Index p = f.loadings.rows(), k = f.sigma.size();
  for (Index c = 0; c < k; ++c) {
    Index at = 0;
    for (Index j = 1; j < p; ++j)
      if (std::abs(f.loadings(j, c)) > std::abs(f.loadings(at, c))) at = j;
    if (f.loadings(at, c) < 0) {
      f.loadings.col(c) *= -1;
      f.scores.col(c) *= -1;
    }
  }
  const VecD& sigma = f.sigma;
  out.singular_values = sigma;
  out.scores = std::move(f.scores);
  out.loadings = std::move(f.loadings);
  out.eigenvalues = sigma.array().square() / static_cast<double>(n - 1);
  out.ratio = frobenius2 > 0 ? VecD(sigma.array().square() / frobenius2) : VecD(VecD::Zero(k));
  out.cumulative.resize(k);
  double running = 0;
  for (Index c = 0; c < k; ++c) out.cumulative(c) = running += out.ratio(c);
}

}  // namespace

Projection truncated_pca(MatrixRef x, const ProjectionOptions& o) {
  const Index n = x.rows(), p = x.cols();
  const Index m = std::min(n, p);
  const Index k = o.components;
  if (n < 2) throw_usage_error("PCA needs at least 2 samples");
  if (k < 1 || k > m)
    throw_usage_error("`components` " + std::to_string(k) + " is out of range",
                      "it must be between 1 and min(samples, features) = " + std::to_string(m));
  const int threads = internal::thread_count(o.threads);
  Projection out;
  out.center = VecD::Zero(p);
  out.scale = VecD::Ones(p);
  const double frobenius2 = standardise_columns(x, o, threads, out);
  out.total_variance = frobenius2 / static_cast<double>(n - 1);

  const bool wide = n <= p;
  const Index keep = std::min(m, k + std::max<std::int64_t>(0, o.oversample));
  Factors f;
  if (m <= 256 || 2 * keep >= m) {
    f = dense_pca(x, wide, k, threads, out);  // small side
  } else {
    switch (krylov_pca(x, o, keep, threads, out, f)) {
      case KrylovEnd::kConverged:
        break;
      case KrylovEnd::kExhausted:
        f = dense_pca(x, wide, k, threads, out);
        break;
      case KrylovEnd::kNotConverged:
        return out;
    }
  }
  orient_and_explain(std::move(f), frobenius2, n, out);
  return out;
}

Eigen::MatrixXd project_rows(const ConstMatrixRef& x, const Eigen::VectorXd& center, const Eigen::VectorXd& scale,
                             const Eigen::MatrixXd& loadings) {
  MatD z = x.cast<double>();
  for (Index j = 0; j < z.cols(); ++j) z.col(j) = (z.col(j).array() - center(j)) / scale(j);
  return mul(z, loadings);
}

}  // namespace pare

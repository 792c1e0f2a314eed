// Truncated PCA (centred, optionally scaled) and truncated SVD (uncentred) of a wide or tall
// matrix, without forming a p x p (or n x n for tall data) matrix product of the data with itself.
#pragma once

#include <Eigen/Core>

#include <cstdint>  // std::int64_t, std::uint64_t
#include <functional>   // std::function
#include <string>   // std::string
#include <string_view>  // std::string_view

#include "pare/matrix.h"

namespace pare {

struct ProjectionOptions {
  std::int64_t components = 2;   ///< K, 1 <= K <= min(n, p)
  bool center = true;            ///< false: truncated SVD of the raw values
  bool scale = false;            ///< divide each centred column by its sd (correlation PCA)
  double tolerance = 1e-8;       ///< convergence: every Ritz residual <= tolerance x largest eigenvalue
  /// Krylov blocks before giving up; 0: as many as keep the space within 60 (K + oversample)
  /// columns.
  int max_iterations = 0;
  std::int64_t oversample = 10;  ///< K + oversample Ritz vectors go into the final Rayleigh-Ritz step
  /// Krylov block width; 0: on a Gram matrix formed once, a quarter of K + oversample between 8
  /// and 16 columns, otherwise K + oversample.
  std::int64_t block = 0;
  std::uint64_t seed = 1;        ///< starting block
  int threads = 0;
  /// Iterate with float32 products (and a tolerance of at least 3e-5) whatever the size; above
  /// 2^24 values they are used anyway.
  bool float_products = false;
};

/// A truncated PCA / SVD. Components are sorted by singular value, largest first, and
/// sign-normalised: in each component the loading of largest magnitude is positive.
struct Projection {
  Eigen::MatrixXd scores;           ///< n x K: the analysed matrix times the loadings (U Sigma)
  Eigen::MatrixXd loadings;         ///< p x K: right singular vectors (V)
  Eigen::VectorXd singular_values;  ///< K
  Eigen::VectorXd eigenvalues;      ///< sigma^2 / (n - 1)
  Eigen::VectorXd ratio;            ///< sigma^2 / squared Frobenius norm of the analysed matrix
  Eigen::VectorXd cumulative;       ///< running sum of ratio
  Eigen::VectorXd center;           ///< p: subtracted means (zeros without centring)
  Eigen::VectorXd scale;            ///< p: divisors (ones without scaling)
  double total_variance = 0;        ///< squared Frobenius norm / (n - 1): the sum of column variances when centred
  std::string method;               ///< "dense" or "block Krylov"
  std::string precision;            ///< precision of the products in the iterations: "double" or "float"
  int iterations = 0;               ///< Krylov blocks used (0 for dense)
  double residual = 0;              ///< largest relative Ritz residual at convergence
  /// false when the iteration stopped at max_iterations before the tolerance: then `status` says
  /// how far it got, and nothing else but `residual` and `iterations` is set.
  bool converged = true;
  std::string status;
};

/// Computes the first `options.components` components of the columns of `x` (n samples x p
/// features, no NaN). `x` is centred and scaled in place (it is not copied); on return it holds
/// the analysed matrix. Throws Error(kUsage) when K is out of range; an iteration that does not
/// converge is reported by Projection::converged, not thrown.
Projection truncated_pca(MatrixRef x, const ProjectionOptions& options);

/// Scores of new samples (rows of `x`, columns in the projection's feature order, no NaN):
/// ((x - center) / scale) * loadings, in double.
Eigen::MatrixXd project_rows(const ConstMatrixRef& x, const Eigen::VectorXd& center, const Eigen::VectorXd& scale,
                             const Eigen::MatrixXd& loadings);

}  // namespace pare

#include <vector>  // std::vector

namespace pare {

/// scores.csv: `sample`, PC1..PCK; one line per sample (its id, then its scores).
std::string scores_csv(const Eigen::MatrixXd& scores, const std::vector<std::string>& sample_ids);
/// loadings.tsv: feature, PC1..PCK (shortest round-trip numbers, so reading it back is exact).
std::string loadings_tsv(const Eigen::MatrixXd& loadings, const std::vector<std::string>& names);
/// Same, handed to `sink` piece by piece (in order).
void write_loadings_tsv(const Eigen::MatrixXd& loadings, const std::vector<std::string>& names,
                        const std::function<void(std::string_view)>& sink);
/// explained.tsv: component, eigenvalue (sigma^2 / (n - 1)), ratio, cumulative_ratio, singular_value.
std::string explained_tsv(const Projection& projection);
/// Reads loadings.tsv back, checking that its features are `names` in order.
Eigen::MatrixXd read_loadings_tsv(const std::string& path, const std::vector<std::string>& names);

}  // namespace pare

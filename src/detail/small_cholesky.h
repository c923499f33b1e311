#pragma once
// Cholesky factorization and solves for the small symmetric matrices of a filter step (innovation
// covariances, predicted covariances: typically 1 to 10 rows). Plain loops over column-major storage:
// for these sizes they are several times faster than Eigen's blocked, size-generic LLT, and they never
// allocate. Textbook algorithms (G. H. Golub and C. F. Van Loan, Matrix Computations, 4th ed., 2013,
// algorithm 4.2.1 and section 3.1).

#include <cmath>

#include <Eigen/Core>

namespace statewise::detail {

// Overwrites the lower triangle of the symmetric positive definite `a` with its Cholesky factor L
// (a = L L'); the strict upper triangle is not touched. Returns false when `a` is not positive definite
// (a pivot is not > 0 or not finite).
inline bool cholesky_in_place(Eigen::Ref<Eigen::MatrixXd> a) {
  const Eigen::Index n = a.rows();
  for (Eigen::Index j = 0; j < n; ++j) {
    double pivot = a(j, j);
    for (Eigen::Index k = 0; k < j; ++k) pivot -= a(j, k) * a(j, k);
    if (!(pivot > 0.0) || !std::isfinite(pivot)) return false;
    const double root = std::sqrt(pivot);
    a(j, j) = root;
    const double inverse = 1.0 / root;
    for (Eigen::Index i = j + 1; i < n; ++i) {
      double value = a(i, j);
      for (Eigen::Index k = 0; k < j; ++k) value -= a(i, k) * a(j, k);
      a(i, j) = value * inverse;
    }
  }
  return true;
}

// Solves L y = b in place for each column of `b`, L the lower triangle of `factor`.
inline void lower_solve_in_place(const Eigen::Ref<const Eigen::MatrixXd>& factor, Eigen::Ref<Eigen::MatrixXd> b) {
  const Eigen::Index n = factor.rows();
  for (Eigen::Index c = 0; c < b.cols(); ++c)
    for (Eigen::Index i = 0; i < n; ++i) {
      double value = b(i, c);
      for (Eigen::Index k = 0; k < i; ++k) value -= factor(i, k) * b(k, c);
      b(i, c) = value / factor(i, i);
    }
}

// Solves L' x = y in place for each column of `b`.
inline void upper_solve_in_place(const Eigen::Ref<const Eigen::MatrixXd>& factor, Eigen::Ref<Eigen::MatrixXd> b) {
  const Eigen::Index n = factor.rows();
  for (Eigen::Index c = 0; c < b.cols(); ++c)
    for (Eigen::Index i = n; i-- > 0;) {
      double value = b(i, c);
      for (Eigen::Index k = i + 1; k < n; ++k) value -= factor(k, i) * b(k, c);
      b(i, c) = value / factor(i, i);
    }
}

// Solves (L L') X = B in place.
inline void cholesky_solve_in_place(const Eigen::Ref<const Eigen::MatrixXd>& factor, Eigen::Ref<Eigen::MatrixXd> b) {
  lower_solve_in_place(factor, b);
  upper_solve_in_place(factor, b);
}

}  // namespace statewise::detail

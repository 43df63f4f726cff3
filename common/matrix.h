// The matrix types every numeric file in common/ shares.
// Storage order: row-major; a row is one input (sample), a column one feature / unit / class.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <vector>

namespace chorus {

using Matrix = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
using Vector = Eigen::VectorXf;  // column vector of float32
using MatrixRef = Eigen::Ref<Matrix>;
using ConstMatrixRef = Eigen::Ref<const Matrix>;
using MatrixD = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;

}  // namespace chorus

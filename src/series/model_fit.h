// ModelFit: the fit a series model judges with (series/series_model.h).
// It holds a glm::FitResult's figures and keeps the fit's arrays — the
// coefficients, the covariance and the aliased flags — together in one
// block, where a glm::FitResult has three heap allocations (Eigen's two and
// std::vector<bool>'s).
//
// Why: a restore builds a fit for every series at once, ~640 bytes of heap
// each in three pieces. On the build machine's VM each fresh 4 KiB heap page
// costs a fault and the host's first touch of it (docs/benchmarks.md,
// "Restart, sixth pass" and "eighth pass"); one block carved out of the
// restore's huge-page mapping (core/bulk_memory.h) costs neither. A live
// model's block is one heap allocation, made at its first fit and
// overwritten by the later fits of the same shapes.
//
// Contract:
// - The figures (status, note, dispersion, theta, df_residual, ...) are the
//   public glm::FitFigures base; the arrays are read and written through
//   coefficients(), covariance() and aliased(). All arrays are empty until
//   assign() or shape().
// - coefficients() and covariance() are Eigen maps of a block aligned to 16
//   bytes, as Eigen's own vectors and matrices are: a product with them runs
//   the same kernels in the same order as with a glm::FitResult's arrays,
//   so it gives the same bits.
// - assign(result) copies `result` (figures and arrays, of any shapes) into
//   the block in use (on the heap or in a mapping) when it is large enough,
//   else into a new heap block: a model's refits all have the same shapes.
// - shape(...) gives the fit a new block for arrays of the given shapes, in
//   `bulk` when it is non-null and has room (then true is returned, and the
//   caller keeps the mapping alive as long as this fit or a later assign
//   uses the block), else on the heap. The coefficients and flags held
//   before are kept, as many as the new shapes hold, the rest 0 / false;
//   the covariance's values are unspecified until written.
// - result() is a glm::FitResult copy of the whole fit, for reports.
// - Copying copies the arrays into a heap block of the copy's own; moving
//   takes the block and leaves the source empty.
// Not thread-safe.
#pragma once

#include <cstddef>
#include <memory>

#include <Eigen/Dense>

#include "glm/fit.h"

namespace tallyd {

class BulkMemory;

class ModelFit : public glm::FitFigures {
 public:
  using VectorMap = Eigen::Map<Eigen::VectorXd, Eigen::Aligned16>;
  using ConstVectorMap = Eigen::Map<const Eigen::VectorXd, Eigen::Aligned16>;
  using MatrixMap = Eigen::Map<Eigen::MatrixXd, Eigen::Aligned16>;
  using ConstMatrixMap = Eigen::Map<const Eigen::MatrixXd, Eigen::Aligned16>;

  ModelFit() = default;
  ModelFit(const ModelFit& other);
  ModelFit& operator=(const ModelFit& other);
  ModelFit(ModelFit&& other) noexcept;
  ModelFit& operator=(ModelFit&& other) noexcept;
  ~ModelFit() = default;

  ConstVectorMap coefficients() const { return ConstVectorMap(data_, coefficients_); }
  VectorMap coefficients() { return VectorMap(data_, coefficients_); }
  ConstMatrixMap covariance() const { return ConstMatrixMap(covariance_data(), rows_, cols_); }
  MatrixMap covariance() { return MatrixMap(covariance_data(), rows_, cols_); }
  std::size_t aliased_count() const { return aliased_; }
  // Precondition: i < aliased_count().
  bool aliased(std::size_t i) const { return flags()[i] != 0; }
  void set_aliased(std::size_t i, bool value) { flags()[i] = value ? 1 : 0; }

  void assign(const glm::FitResult& result);
  bool shape(Eigen::Index coefficients, std::size_t aliased, Eigen::Index rows, Eigen::Index cols,
             BulkMemory* bulk);
  glm::FitResult result() const;

 private:
  // Doubles of the block for these shapes: the coefficients (rounded up to
  // an even count, so that the covariance starts 16-byte aligned too), the
  // covariance, then the flags a byte each.
  static std::size_t block_doubles(Eigen::Index coefficients, std::size_t aliased, Eigen::Index rows,
                                   Eigen::Index cols);
  double* covariance_data() const { return data_ + (coefficients_ + 1) / 2 * 2; }
  unsigned char* flags() const { return reinterpret_cast<unsigned char*>(covariance_data() + rows_ * cols_); }
  void copy_arrays(const ModelFit& other);

  std::unique_ptr<double[]> owned_;  // the block, unless placed in a mapping
  double* data_ = nullptr;           // the block in use
  std::size_t capacity_ = 0;         // doubles in the block
  Eigen::Index coefficients_ = 0;
  Eigen::Index rows_ = 0, cols_ = 0;  // of the covariance
  std::size_t aliased_ = 0;           // flags
};

}  // namespace tallyd

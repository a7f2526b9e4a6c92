#include "series/model_fit.h"

#include <algorithm>
#include <cstring>
#include <utility>

#include "core/bulk_memory.h"

namespace tallyd {

// The maps declare 16-byte alignment; a heap block from new[] has it.
static_assert(__STDCPP_DEFAULT_NEW_ALIGNMENT__ >= 16);

std::size_t ModelFit::block_doubles(Eigen::Index coefficients, std::size_t aliased, Eigen::Index rows,
                                    Eigen::Index cols) {
  return static_cast<std::size_t>((coefficients + 1) / 2 * 2 + rows * cols) + (aliased + 7) / 8;
}

ModelFit::ModelFit(const ModelFit& other) : glm::FitFigures(other) { copy_arrays(other); }

ModelFit& ModelFit::operator=(const ModelFit& other) {
  if (this != &other) {
    glm::FitFigures::operator=(other);
    copy_arrays(other);
  }
  return *this;
}

ModelFit::ModelFit(ModelFit&& other) noexcept
    : glm::FitFigures(std::move(other)),
      owned_(std::move(other.owned_)),
      data_(std::exchange(other.data_, nullptr)),
      capacity_(std::exchange(other.capacity_, 0)),
      coefficients_(std::exchange(other.coefficients_, 0)),
      rows_(std::exchange(other.rows_, 0)),
      cols_(std::exchange(other.cols_, 0)),
      aliased_(std::exchange(other.aliased_, 0)) {}

ModelFit& ModelFit::operator=(ModelFit&& other) noexcept {
  if (this != &other) {
    glm::FitFigures::operator=(std::move(other));
    owned_ = std::move(other.owned_);
    data_ = std::exchange(other.data_, nullptr);
    capacity_ = std::exchange(other.capacity_, 0);
    coefficients_ = std::exchange(other.coefficients_, 0);
    rows_ = std::exchange(other.rows_, 0);
    cols_ = std::exchange(other.cols_, 0);
    aliased_ = std::exchange(other.aliased_, 0);
  }
  return *this;
}

void ModelFit::copy_arrays(const ModelFit& other) {
  // Into a heap block of this fit's own, even when `other` was placed.
  owned_.reset();
  data_ = nullptr;
  capacity_ = 0;
  coefficients_ = rows_ = cols_ = 0;
  aliased_ = 0;
  const std::size_t doubles = block_doubles(other.coefficients_, other.aliased_, other.rows_, other.cols_);
  if (doubles == 0) return;
  owned_ = std::make_unique<double[]>(doubles);
  data_ = owned_.get();
  capacity_ = doubles;
  coefficients_ = other.coefficients_;
  rows_ = other.rows_;
  cols_ = other.cols_;
  aliased_ = other.aliased_;
  std::memcpy(data_, other.data_, doubles * sizeof(double));
}

bool ModelFit::shape(Eigen::Index coefficients, std::size_t aliased, Eigen::Index rows, Eigen::Index cols,
                     BulkMemory* bulk) {
  const std::size_t doubles = block_doubles(coefficients, aliased, rows, cols);
  double* block = nullptr;
  std::unique_ptr<double[]> own;
  // take() hands out zeroed memory; the maps need 16-byte alignment.
  if (bulk != nullptr && doubles > 0) block = static_cast<double*>(bulk->take(doubles * sizeof(double), 16));
  const bool placed = block != nullptr;
  if (block == nullptr && doubles > 0) {
    own = std::make_unique<double[]>(doubles);  // zeroed
    block = own.get();
  }
  // The coefficients and flags that the new shapes still hold, from the old
  // layout into the new one.
  const ModelFit old(std::move(*this));
  static_cast<glm::FitFigures&>(*this) = old;
  owned_ = std::move(own);
  data_ = block;
  capacity_ = doubles;
  coefficients_ = coefficients;
  rows_ = rows;
  cols_ = cols;
  aliased_ = aliased;
  const Eigen::Index kept = std::min(coefficients, old.coefficients_);
  if (kept > 0) std::memcpy(data_, old.data_, static_cast<std::size_t>(kept) * sizeof(double));
  for (std::size_t i = 0; i < std::min(aliased, old.aliased_); ++i) set_aliased(i, old.aliased(i));
  return placed;
}

void ModelFit::assign(const glm::FitResult& result) {
  glm::FitFigures::operator=(result);
  const Eigen::Index nc = result.coefficients.size();
  const Eigen::Index rows = result.covariance.rows(), cols = result.covariance.cols();
  const std::size_t na = result.aliased.size();
  const std::size_t doubles = block_doubles(nc, na, rows, cols);
  // The block in use (the heap's or a restore's mapping) when it is large
  // enough: a model's refits have the same shapes every time.
  if (doubles > capacity_) {
    owned_ = std::make_unique_for_overwrite<double[]>(doubles);
    data_ = owned_.get();
    capacity_ = doubles;
  }
  coefficients_ = nc;
  rows_ = rows;
  cols_ = cols;
  aliased_ = na;
  coefficients() = result.coefficients;
  covariance() = result.covariance;
  for (std::size_t i = 0; i < na; ++i) set_aliased(i, result.aliased[i]);
}

glm::FitResult ModelFit::result() const {
  glm::FitResult out;
  static_cast<glm::FitFigures&>(out) = *this;
  out.coefficients = coefficients();
  out.covariance = covariance();
  out.aliased.resize(aliased_);
  for (std::size_t i = 0; i < aliased_; ++i) out.aliased[i] = aliased(i);
  return out;
}

}  // namespace tallyd

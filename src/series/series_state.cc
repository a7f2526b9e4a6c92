// Saving and restoring a SeriesModel exactly: a model restored from its saved
// state makes the same predictions, bit for bit, as the one that was saved.
#include <algorithm>
#include <bit>
#include <cstdint>
#include <type_traits>

#include <fmt/format.h>

#include "core/bulk_memory.h"
#include "core/state_codec.h"
#include "series/series_model.h"

namespace tallyd {
namespace {

// Flags of a history record in the binary layout.
constexpr std::uint64_t kUnitExposure = 1;  // exposure is exactly 1.0 and not saved
constexpr std::uint64_t kUnitWeight = 2;    // weight is exactly 1.0 and not saved

bool is_one(double v) { return std::bit_cast<std::uint64_t>(v) == std::bit_cast<std::uint64_t>(1.0); }

// to - from and from + step, wrapping like unsigned arithmetic so that no
// saved value, however damaged, can overflow.
std::int64_t step(std::int64_t from, std::int64_t to) {
  return static_cast<std::int64_t>(static_cast<std::uint64_t>(to) - static_cast<std::uint64_t>(from));
}
std::int64_t advance(std::int64_t from, std::int64_t by) {
  return static_cast<std::int64_t>(static_cast<std::uint64_t>(from) + static_cast<std::uint64_t>(by));
}

void save_fit(StateWriter& w, const ModelFit& f) {
  w.tag("fit");
  w.u64(static_cast<std::uint64_t>(f.status));
  w.str(f.note);
  const ModelFit::ConstVectorMap coefficients = f.coefficients();
  w.u64(static_cast<std::uint64_t>(coefficients.size()));
  for (Eigen::Index i = 0; i < coefficients.size(); ++i) w.f64(coefficients(i));
  w.u64(f.aliased_count());
  for (std::size_t i = 0; i < f.aliased_count(); ++i) w.boolean(f.aliased(i));
  const ModelFit::ConstMatrixMap covariance = f.covariance();
  w.u64(static_cast<std::uint64_t>(covariance.rows()));
  w.u64(static_cast<std::uint64_t>(covariance.cols()));
  for (Eigen::Index j = 0; j < covariance.cols(); ++j)
    for (Eigen::Index i = 0; i < covariance.rows(); ++i) w.f64(covariance(i, j));
  for (double d : {f.deviance, f.null_deviance, f.log_likelihood, f.aic, f.dispersion, f.theta, f.theta_std_error})
    w.f64(d);
  w.boolean(f.theta_at_limit);
  for (int n : {f.rank, f.df_residual, f.n, f.iterations}) w.i64(n);
  w.newline();
}

glm::FitStatus status_from(StateReader& r, std::uint64_t v) {
  if (v > static_cast<std::uint64_t>(glm::FitStatus::failed)) r.fail("unknown fit status");
  return static_cast<glm::FitStatus>(v);
}

// Sizes come from a file: bound them before allocating.
constexpr std::uint64_t kMaxSaved = 100'000'000;

// Returns true when the fit's arrays were placed in `bulk`.
bool load_fit(StateReader& r, ModelFit& f, int p, BulkMemory* bulk) {
  r.expect("fit");
  f.status = status_from(r, r.u64());
  f.note = r.str();
  const std::uint64_t nc = r.u64();
  // An empty fit (never fitted) has no coefficients, whatever the model.
  if (!r.failed() && nc != 0 && nc != static_cast<std::uint64_t>(p))
    r.fail(fmt::format("fit has {} coefficients, the configured model has {}", nc, p));
  if (r.failed()) return false;
  // The arrays in one block of the shapes every saved fit has (nc flags, an
  // nc x nc covariance); the shapes are read after the values they follow,
  // so a fit saved with others gets a block of its own below.
  const auto count = static_cast<Eigen::Index>(nc);
  bool placed = f.shape(count, nc, count, count, bulk);
  r.f64s(f.coefficients().data(), static_cast<std::size_t>(count));
  const std::uint64_t na = r.u64();
  // A flag takes at least a byte of the state.
  if (na > kMaxSaved || na > r.remaining()) r.fail("aliased flags too many");
  if (r.failed()) return placed;
  if (na != nc) {
    f.shape(count, na, count, count, nullptr);
    placed = false;
  }
  for (std::size_t i = 0; i < na; ++i) f.set_aliased(i, r.boolean());
  const std::uint64_t rows = r.u64(), cols = r.u64();
  // Every value takes at least a byte of the state: a damaged size cannot
  // ask for more memory than the rest of the file could fill.
  if (rows > 10000 || cols > 10000 || rows * cols > r.remaining())
    r.fail(fmt::format("covariance of {} x {} is more than the rest of the state holds", rows, cols));
  if (r.failed()) return placed;
  if (rows != nc || cols != nc) {
    f.shape(count, na, static_cast<Eigen::Index>(rows), static_cast<Eigen::Index>(cols), nullptr);
    placed = false;
  }
  // Column by column, as saved: the map's own (column-major) order.
  ModelFit::MatrixMap covariance = f.covariance();
  r.f64s(covariance.data(), static_cast<std::size_t>(covariance.size()));
  f.deviance = r.f64();
  f.null_deviance = r.f64();
  f.log_likelihood = r.f64();
  f.aic = r.f64();
  f.dispersion = r.f64();
  f.theta = r.f64();
  f.theta_std_error = r.f64();
  f.theta_at_limit = r.boolean();
  f.rank = static_cast<int>(r.i64());
  f.df_residual = static_cast<int>(r.i64());
  f.n = static_cast<int>(r.i64());
  f.iterations = static_cast<int>(r.i64());
  return placed;
}

}  // namespace

// Seconds from origin_ to `time`, for a time not before it (unsigned, so
// that no saved value, however damaged, can overflow).
std::uint64_t SeriesModel::since_origin(TimePoint time) const {
  return static_cast<std::uint64_t>(time.time_since_epoch().count()) -
         static_cast<std::uint64_t>(origin_->time_since_epoch().count());
}

bool SeriesModel::fits_stored(TimePoint time, std::int64_t count) const {
  if (!origin_ || time < *origin_ || count < 0 || count > std::int64_t{UINT32_MAX}) return false;
  return since_origin(time) <= UINT32_MAX;
}

void SeriesModel::push_record(TimePoint time, std::int64_t count) {
  const bool fits = fits_stored(time, count);
  const std::uint64_t since = fits ? since_origin(time) : 0;
  if (wide_.empty() && !fits) {
    // Rows for the records before this one (all of which fit), as scales_ does.
    wide_.reserve(std::max(records_.capacity(), records_.size() + 1));
    for (std::size_t i = 0; i < records_.size(); ++i) {
      const Stored& narrow = *records_.row(i);
      *wide_.push_back() = Wide{*origin_ + Seconds{narrow.since_origin}, static_cast<std::int64_t>(narrow.count)};
    }
  }
  *records_.push_back() =
      fits ? Stored{static_cast<std::uint32_t>(since), static_cast<std::uint32_t>(count)} : Stored{0, 0};
  if (!wide_.empty()) *wide_.push_back() = Wide{time, count};
}

void SeriesModel::push_scales(double exposure, double weight) {
  if (scales_.empty()) {
    if (is_one(exposure) && is_one(weight)) return;
    // Rows for the records before this one, all {1, 1}, in a block as large
    // as the window's so that the rows never move once the window is full.
    scales_.reserve(std::max(records_.capacity(), records_.size()));
    const double ones[2] = {1.0, 1.0};
    for (std::size_t i = 0; i + 1 < records_.size(); ++i) scales_.push_back(ones);
  }
  const double row[2] = {exposure, weight};
  scales_.push_back(row);
}

void SeriesModel::save_state(StateWriter& w) const {
  w.tag("model");
  w.boolean(origin_.has_value());
  w.i64(origin_ ? origin_->time_since_epoch().count() : 0);
  w.u64(since_refit_);
  w.boolean(has_fit_);
  w.u64(static_cast<std::uint64_t>(last_fit_status_));
  w.str(last_fit_note_);
  w.u64(fits_done_);
  w.newline();
  w.tag("history");
  w.u64(records_.size());
  w.u64(settings_->model.covariates.size());
  w.newline();
  const std::size_t k = settings_->model.covariates.size();
  std::int64_t previous = 0;
  for (std::size_t i = 0; i < records_.size(); ++i) {
    const std::int64_t time = time_at(i).time_since_epoch().count();
    const std::int64_t count = count_at(i);
    const double exposure = exposure_at(i), weight = weight_at(i);
    if (w.binary()) {
      // The history is most of a checkpoint: a record is a flags byte, its
      // time as the step from the record before, its count, and only those
      // of exposure and weight that are not exactly 1.
      const bool unit_exposure = is_one(exposure), unit_weight = is_one(weight);
      w.u64((unit_exposure ? kUnitExposure : 0) | (unit_weight ? kUnitWeight : 0));
      w.i64(step(previous, time));
      w.i64(count);
      if (!unit_exposure) w.f64(exposure);
      if (!unit_weight) w.f64(weight);
      previous = time;
    } else {
      w.i64(time);
      w.i64(count);
      w.f64(exposure);
      w.f64(weight);
    }
    const double* cov = covariate_values_.row(i);
    for (std::size_t c = 0; c < k; ++c) w.f64(cov[c]);
    w.newline();
  }
  save_fit(w, fit_);
}

void SeriesModel::load_state(StateReader& r) {
  r.expect("model");
  // The step sums (model.step_between_refits) are not saved: a restored
  // series refits at its first new record and starts them again.
  steps_.reset();
  const bool has_origin = r.boolean();
  const std::int64_t origin = r.i64();
  origin_.reset();
  if (has_origin) origin_ = TimePoint{Seconds{origin}};
  since_refit_ = r.u64();
  has_fit_ = r.boolean();
  last_fit_status_ = status_from(r, r.u64());
  last_fit_note_ = r.str();
  fits_done_ = r.u64();
  r.expect("history");
  const std::uint64_t n = r.u64();
  const std::uint64_t k = r.u64();
  if (!r.failed() && k != settings_->model.covariates.size())
    r.fail(fmt::format("series '{}' was saved with {} covariates, the configured model has {}", id_, k,
                       settings_->model.covariates.size()));
  if (!r.failed() && n > kMaxSaved) r.fail("history too long");
  if (r.failed()) return;
  records_.clear();
  wide_.clear();
  covariate_values_.clear();
  scales_.clear();
  season_values_.clear();  // derived from the times; refilled by the next learn()
  // One block for the whole history. A record takes at least 3 bytes of the
  // state (binary: flags, time step, count; text: more), so a damaged count
  // cannot reserve more than the state could hold.
  const std::size_t rows = static_cast<std::size_t>(std::min<std::uint64_t>(n, r.remaining() / 3));
  // Nothing of the old state may point into a mapping once bulk_ lets go of it.
  fit_ = ModelFit{};
  bulk_.reset();
  const std::shared_ptr<BulkMemory> bulk = rows > 0 ? r.memory() : nullptr;
  // A ring's block from the bulk mapping when it can hold it, else its own.
  const auto place = [&](auto& ring) {
    using Row = std::remove_pointer_t<decltype(ring.row(0))>;
    if (void* block = bulk ? bulk->take(rows * ring.width() * sizeof(Row), alignof(Row)) : nullptr) {
      ring.adopt(static_cast<Row*>(block), rows);
      bulk_ = bulk;
    } else {
      ring.reserve(rows);
    }
  };
  place(records_);
  if (k > 0) place(covariate_values_);
  // Appends one record; returns its row of covariates (k values to fill).
  const auto append = [&](std::int64_t time, std::int64_t count, double exposure, double weight) {
    // The first record that does not fit Stored starts wide_'s rows, the
    // first with a scale other than 1 scales_': their blocks are placed like
    // the others, for the whole saved history.
    const TimePoint at{Seconds{time}};
    if (wide_.empty() && !fits_stored(at, count)) place(wide_);
    push_record(at, count);
    if (!scales_.empty() || !(is_one(exposure) && is_one(weight))) {
      if (scales_.empty()) place(scales_);
      push_scales(exposure, weight);
    }
    return k > 0 ? covariate_values_.push_back() : nullptr;
  };
  std::int64_t previous = 0;
  std::uint64_t i = 0;
  if (r.binary()) {
    // The longest record a binary history can hold: flags (1 byte when
    // known), time step and count (10 each), exposure and weight, the
    // covariates.
    const std::size_t longest = 1 + 10 + 10 + 8 + 8 + 8 * static_cast<std::size_t>(k);
    while (i < n && !r.failed()) {
      // Most records are decoded straight from the reader's buffer;
      // decode_records stops short of the buffer's last `longest` bytes and
      // at anything unusual (a flags byte it does not know), which the
      // record-by-record path below then reads, or refuses with its words.
      const std::string_view buffered = r.peek(longest);
      const auto* at = reinterpret_cast<const unsigned char*>(buffered.data());
      std::size_t used = 0;
      while (i < n && buffered.size() - used >= longest) {
        const unsigned char* p = at + used;
        const std::uint64_t flags = *p;
        if (flags > (kUnitExposure | kUnitWeight)) break;
        std::size_t len = 1;
        std::uint64_t v = 0;
        std::size_t bytes = decode_leb128(p + len, v);
        if (bytes == 0) break;
        len += bytes;
        const std::int64_t time = advance(previous, unzigzag(v));
        bytes = decode_leb128(p + len, v);
        if (bytes == 0) break;
        len += bytes;
        const std::int64_t count = unzigzag(v);
        double exposure = 1.0, weight = 1.0;
        if (!(flags & kUnitExposure)) {
          exposure = decode_f64(p + len);
          len += 8;
        }
        if (!(flags & kUnitWeight)) {
          weight = decode_f64(p + len);
          len += 8;
        }
        previous = time;
        double* cov = append(time, count, exposure, weight);
        for (std::uint64_t c = 0; c < k; ++c, len += 8) cov[c] = decode_f64(p + len);
        used += len;
        ++i;
      }
      r.skip(used);
      if (i == n || r.failed()) break;
      const std::uint64_t flags = r.u64();
      if (flags > (kUnitExposure | kUnitWeight)) r.fail(fmt::format("history record flags {} unknown", flags));
      previous = advance(previous, r.i64());
      const std::int64_t count = r.i64();
      double exposure = 1.0, weight = 1.0;
      if (!(flags & kUnitExposure)) exposure = r.f64();
      if (!(flags & kUnitWeight)) weight = r.f64();
      if (r.failed()) break;
      double* cov = append(previous, count, exposure, weight);
      for (std::uint64_t c = 0; c < k; ++c) cov[c] = r.f64();
      ++i;
    }
  }
  for (; i < n && !r.failed(); ++i) {
    const std::int64_t time = r.i64();
    const std::int64_t count = r.i64();
    const double exposure = r.f64();
    const double weight = r.f64();
    double* cov = append(time, count, exposure, weight);
    for (std::uint64_t c = 0; c < k; ++c) cov[c] = r.f64();
  }
  if (!records_.empty()) newest_ = time_at(records_.size() - 1);
  // The fit's arrays beside the history in the mapping (series/model_fit.h).
  const std::shared_ptr<BulkMemory>& memory = r.memory();
  if (load_fit(r, fit_, p_, memory.get())) bulk_ = memory;
}

}  // namespace tallyd

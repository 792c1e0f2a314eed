#include "kernels/kernels.h"

#include <atomic>  // std::atomic

#include "kernels/table.h"

namespace pare::kernels {

namespace {

constexpr int kLevels = 3;

// The table of each level this build has (nullptr where the build has none).
const Table* built(Level level) {
  switch (level) {
    case Level::kBaseline:
      return &baseline_table;
#ifdef PARE_KERNELS_X86_LEVELS
    case Level::kAvx2:
      return &avx2_table;
    case Level::kAvx512:
      return &avx512_table;
#else
    case Level::kAvx2:
    case Level::kAvx512:
      break;
#endif
  }
  return nullptr;
}

bool processor_has(Level level) {
#ifdef PARE_KERNELS_X86_LEVELS
  // The psABI levels: v3 is AVX, AVX2, BMI1, BMI2, F16C, FMA, LZCNT and MOVBE, v4 adds AVX-512 F,
  // BW, CD, DQ and VL; the checks include the operating system's support for the wider registers.
  __builtin_cpu_init();
#  if defined(__clang__)
  // Clang (14) knows no level names, nor F16C, LZCNT and MOVBE, which every processor with AVX2,
  // BMI2 and FMA has.
  const bool v3 = __builtin_cpu_supports("avx2") && __builtin_cpu_supports("bmi") &&
                  __builtin_cpu_supports("bmi2") && __builtin_cpu_supports("fma");
  const bool v4 = v3 && __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512bw") &&
                  __builtin_cpu_supports("avx512cd") && __builtin_cpu_supports("avx512dq") &&
                  __builtin_cpu_supports("avx512vl");
#  else
  const bool v3 = __builtin_cpu_supports("x86-64-v3");
  const bool v4 = __builtin_cpu_supports("x86-64-v4");
#  endif
  switch (level) {
    case Level::kBaseline:
      return true;
    case Level::kAvx2:
      return v3;
    case Level::kAvx512:
      return v4;
  }
  return false;
#else
  return level == Level::kBaseline;
#endif
}

Level best_level() {
  static const Level best = [] {
    for (int l = kLevels - 1; l > 0; --l)
      if (level_supported(static_cast<Level>(l))) return static_cast<Level>(l);
    return Level::kBaseline;
  }();
  return best;
}

// -1: the best level; else the forced one.
std::atomic<int> forced{-1};

const Table& table() {
  const int f = forced.load(std::memory_order_relaxed);
  return *built(f < 0 ? best_level() : static_cast<Level>(f));
}

}  // namespace

const char* level_name(Level level) {
  switch (level) {
    case Level::kBaseline:
      return "baseline";
    case Level::kAvx2:
      return "avx2";
    case Level::kAvx512:
      break;
  }
  return "avx512";
}

bool level_supported(Level level) {
  return built(level) != nullptr && processor_has(level);
}

Level active_level() {
  const int f = forced.load(std::memory_order_relaxed);
  return f < 0 ? best_level() : static_cast<Level>(f);
}

bool force_level(Level level) {
  if (!level_supported(level)) return false;
  forced.store(static_cast<int>(level));
  return true;
}

void reset_level() {
  forced.store(-1);
}

void gemm(const Shape& shape, const Operand& a, const Operand& b, float* c, std::ptrdiff_t ldc,
          bool accumulate) {
  table().gemm_f32(shape, a, b, c, ldc, accumulate);
}

void gemm(const Shape& shape, const Operand& a, const Operand& b, double* c, std::ptrdiff_t ldc,
          bool accumulate) {
  table().gemm_f64(shape, a, b, c, ldc, accumulate);
}

Stats column_stats(const float* x, std::size_t size) {
  return table().column_stats_f32(x, size);
}
Stats column_stats(const double* x, std::size_t size) {
  return table().column_stats_f64(x, size);
}

Moments moments(const float* x, std::ptrdiff_t n) {
  return table().moments(x, n);
}

double centered_dot(const float* a, double mean_a, const float* b, double mean_b,
                    std::ptrdiff_t n) {
  return table().centered_dot(a, mean_a, b, mean_b, n);
}

std::int32_t dot_i8(const std::int8_t* x, const std::int8_t* y, std::ptrdiff_t n) {
  return table().dot_i8(x, y, n);
}

void rotate_columns(double* a, std::ptrdiff_t ld, std::ptrdiff_t rows, std::ptrdiff_t first,
                    const double* c, const double* s, std::ptrdiff_t count) {
  table().rotate_columns(a, ld, rows, first, c, s, count);
}

}  // namespace pare::kernels

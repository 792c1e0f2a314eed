// The kernels of one instruction-set level, as plain function pointers: the only thing a level
// file (baseline.cpp, avx2.cpp, avx512.cpp) exports; kernels.cpp picks the table.
#pragma once

#include "kernels/kernels.h"

namespace pare::kernels {

struct Table {
  void (*gemm_f32)(const Shape&, const Operand&, const Operand&, float*, std::ptrdiff_t, bool);
  void (*gemm_f64)(const Shape&, const Operand&, const Operand&, double*, std::ptrdiff_t, bool);
  Stats (*column_stats_f32)(const float*, std::size_t);
  Stats (*column_stats_f64)(const double*, std::size_t);
  Moments (*moments)(const float*, std::ptrdiff_t);
  double (*centered_dot)(const float*, double, const float*, double, std::ptrdiff_t);
  std::int32_t (*dot_i8)(const std::int8_t*, const std::int8_t*, std::ptrdiff_t);
  void (*rotate_columns)(double*, std::ptrdiff_t, std::ptrdiff_t, std::ptrdiff_t, const double*,
                         const double*, std::ptrdiff_t);
};

extern const Table baseline_table;
#ifdef PARE_KERNELS_X86_LEVELS
extern const Table avx2_table;
extern const Table avx512_table;
#endif

}  // namespace pare::kernels

// OpenMP helpers: the thread count a call should use.
#pragma once

#include <omp.h>

namespace pare::internal {

/// `requested` when positive, else OpenMP's default (all cores unless OMP_NUM_THREADS says less).
inline int thread_count(int requested) {
  return requested > 0 ? requested : omp_get_max_threads();
}

}  // namespace pare::internal

// The kernels at the build's own target: the x86-64 baseline (SSE2) by default. Always built, and
// the only level on other processors. CMakeLists.txt compiles it with -ffp-contract=off.
#define PARE_KERNEL_LEVEL baseline
#define PARE_KERNEL_TABLE baseline_table
#include "kernels/body.h"

// The kernels for x86-64-v3 (AVX2). CMakeLists.txt compiles this file with -march=x86-64-v3 and
// -ffp-contract=off, so the level's FMA instructions are never used.
#define PARE_KERNEL_LEVEL avx2
#define PARE_KERNEL_TABLE avx2_table
#include "kernels/body.h"

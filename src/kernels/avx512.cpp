// The kernels for x86-64-v4 (AVX-512 F, BW, DQ, VL). CMakeLists.txt compiles this file with
// -march=x86-64-v4 and -ffp-contract=off, so the level's FMA instructions are never used.
#define PARE_KERNEL_LEVEL avx512
#define PARE_KERNEL_TABLE avx512_table
#include "kernels/body.h"

# Warnings for our own targets, and the sanitizer switch (PARE_SANITIZE=address,undefined).
function(pare_set_warnings target)
  target_compile_options(${target} PRIVATE -Wall -Wextra -Wpedantic -Wshadow -Wconversion
                                           -Wno-sign-conversion)
  # With -march=x86-64-v4, GCC 12 reports the AVX-512 kernels Eigen instantiates as reading an
  # uninitialised register: avx512fintrin.h spells "undefined" as `__m512 __Y = __Y`. A false
  # positive of those intrinsics, hundreds of times per build.
  if(CMAKE_CXX_COMPILER_ID STREQUAL "GNU")
    target_compile_options(${target} PRIVATE -Wno-maybe-uninitialized)
  endif()
  if(PARE_SANITIZE)
    target_compile_options(${target} PRIVATE -fsanitize=${PARE_SANITIZE} -fno-omit-frame-pointer
                                             -fno-sanitize-recover=all)
    target_link_options(${target} PRIVATE -fsanitize=${PARE_SANITIZE})
  endif()
endfunction()

# Warnings for our own targets, and the sanitizer switch (PARE_SANITIZE=address,undefined).
function(pare_set_warnings target)
  target_compile_options(${target} PRIVATE -Wall -Wextra -Wpedantic -Wshadow -Wconversion
                                           -Wno-sign-conversion)
  if(PARE_SANITIZE)
    target_compile_options(${target} PRIVATE -fsanitize=${PARE_SANITIZE} -fno-omit-frame-pointer
                                             -fno-sanitize-recover=all)
    target_link_options(${target} PRIVATE -fsanitize=${PARE_SANITIZE})
  endif()
endfunction()

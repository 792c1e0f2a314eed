#!/bin/sh
# ctest "package: find_package consumer": installs the build being tested into a staging folder,
# checks the installed package names no -march (a program using it need not be built for the build
# machine's CPU), then configures, builds and runs tests/package against it as another project would.
# Usage: run.sh BUILD_DIR SOURCE_DIR STAGE_DIR
set -eu
build=$1 source=$2 stage=$3
rm -rf "$stage"
cmake --install "$build" --prefix "$stage/prefix" > "$stage.install.log" 2>&1 || { cat "$stage.install.log"; exit 1; }
if grep -rq -- "-march" "$stage/prefix/lib"*/cmake/pare/; then
  echo "FAIL the installed CMake package carries -march:"; grep -r -- "-march" "$stage/prefix/lib"*/cmake/pare/; exit 1
fi
echo "PASS installed: $(cd "$stage/prefix" && find . -type f | sort | tr '\n' ' ')"
cmake -S "$source/tests/package" -B "$stage/build" -DCMAKE_BUILD_TYPE=Release -DCMAKE_PREFIX_PATH="$stage/prefix" \
  > "$stage/configure.log" 2>&1 || { cat "$stage/configure.log"; exit 1; }
cmake --build "$stage/build" -j2 > "$stage/build.log" 2>&1 || { cat "$stage/build.log"; exit 1; }
exec "$stage/build/pare_consumer"

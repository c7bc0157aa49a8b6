#!/usr/bin/env bash
# Installs a paritas build into a fresh prefix, then configures, builds and
# runs the project in consumer/ against it, as a user of the package would.
# Usage: consumer_test.sh BUILD_DIR WORK_DIR SOURCE_DIR CXX_COMPILER
set -euo pipefail
build_dir=$1 work=$2 source_dir=$3 cxx=$4
here=$(cd "$(dirname "$0")" && pwd)
prefix=$work/prefix
rm -rf "$work"
mkdir -p "$work"

# The install needs the library and the executable; this is a no-op when the
# build is up to date.
cmake --build "$build_dir" --target paritas paritas_cli >"$work/build.log"
cmake --install "$build_dir" --prefix "$prefix" >"$work/install.log"
for f in bin/paritas include/paritas/jobs/jobs.h include/paritas/aggregation/index_formulas.h; do
  [[ -e $prefix/$f ]] || { echo "not installed: $f" >&2; exit 1; }
done
[[ -n $(find "$prefix" -name libparitas.a) ]] || { echo "not installed: libparitas.a" >&2; exit 1; }
"$prefix/bin/paritas" --version

cmake -S "$here/consumer" -B "$work/consumer-build" -DCMAKE_BUILD_TYPE=Release \
  -DCMAKE_CXX_COMPILER="$cxx" -DCMAKE_PREFIX_PATH="$prefix" >"$work/consumer-configure.log"
cmake --build "$work/consumer-build" >"$work/consumer-build.log"
output=$("$work/consumer-build/paritas_consumer" "$source_dir/config/demo.yaml")
echo "$output"
grep -qx "fisher 1.264911" <<<"$output"
grep -qx "check exit 0, 16 regions" <<<"$output"
echo "consumer project built and ran against $prefix"

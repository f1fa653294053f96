#!/usr/bin/env bash
# scripts/demo installs only the build packages, builds only the executable
# (not the test targets), and says
# what it is doing between the package check and the demo's first output.
# Run on a copy of scripts/demo and scripts/build beside a stand-in setup,
# a stand-in cmake on PATH that records its arguments, and a stand-in
# covergrid; nothing is compiled.
# Usage: check_demo_script.sh SCRIPTS_DIR WORK_DIR
set -euo pipefail
scripts=$1 work=$2
rm -rf "$work"
mkdir -p "$work/repo/scripts" "$work/bin" "$work/repo/build/engine/cli"
cp "$scripts/demo" "$scripts/build" "$work/repo/scripts/"
printf "#!/bin/sh\necho \"setup \$*\" >>\"\$CMAKE_LOG\"\n" >"$work/repo/scripts/setup"
cat >"$work/bin/cmake" <<'SH'
#!/bin/sh
echo "$*" >>"$CMAKE_LOG"
case "$*" in *--build*) echo "[ 50%] Building CXX object engine/cli/CMakeFiles/covergrid.dir/src/main.cpp.o" ;; esac
SH
printf '#!/bin/sh\necho "covergrid stand-in: $*"\n' >"$work/repo/build/engine/cli/covergrid"
chmod +x "$work/bin/cmake" "$work/repo/scripts/setup" "$work/repo/build/engine/cli/covergrid"
export CMAKE_LOG=$work/cmake.log
PATH="$work/bin:$PATH" "$work/repo/scripts/demo" >"$work/out.txt" 2>"$work/err.txt"
fail() { echo "check_demo_script: $*" >&2; cat "$work/err.txt" >&2; exit 1; }
grep -q '^setup --build$' "$CMAKE_LOG" || fail "setup was not limited to the build packages"
grep -q -- '--build build -j2 --target covergrid$' "$CMAKE_LOG" || fail "the build was not limited to covergrid: $(cat "$CMAKE_LOG")"
grep -q '^demo: checking the Debian packages' "$work/err.txt" || fail "no word before setup"
grep -q '^demo: building the covergrid executable' "$work/err.txt" || fail "no word before the build"
grep -q '^demo:   \[50%\] engine/cli/CMakeFiles/covergrid.dir/src/main.cpp' "$work/err.txt" || fail "no build progress"
grep -q '^demo: built in [0-9]* s; running the bundled demo' "$work/err.txt" || fail "no word before the run"
grep -q '^covergrid stand-in: run$' "$work/out.txt" || fail "the demo was not run"
echo "check_demo_script: ok"

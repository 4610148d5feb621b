#!/bin/sh
# Install the build tree into a temporary prefix, then build and run small
# consumers: tests/install/consumer.c through pkg-config (jeansgrow.pc) and
# through CMake's find_package(jeansgrow) (target jeansgrow::jeansgrow, the
# program as jeansgrow::program), the README's C example ("Use it as a
# library") through pkg-config, and the installed Python package with no
# help from the environment. Usage: check_install.sh BUILD_DIR SOURCE_DIR
set -eu
build=$1
src=$2
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cmake --install "$build" --prefix "$work/prefix" >/dev/null
libdir=$(ls -d "$work"/prefix/lib* | head -n 1)
test -x "$work/prefix/bin/jeansgrow"
"$work/prefix/bin/jeansgrow" --version

export PKG_CONFIG_PATH="$libdir/pkgconfig"
cc -o "$work/consumer_pc" "$src/tests/install/consumer.c" $(pkg-config --cflags --libs jeansgrow)
LD_LIBRARY_PATH="$libdir" "$work/consumer_pc"

cmake -S "$src/tests/install" -B "$work/consumer" -DCMAKE_PREFIX_PATH="$work/prefix" >/dev/null
cmake --build "$work/consumer" >/dev/null
LD_LIBRARY_PATH="$libdir" "$work/consumer/consumer_cmake"

# The README's C example, as a reader would copy it.
sed -n '/^<!-- c example/,/^```$/p' "$src/README.md" | sed '1,2d;$d' > "$work/baryons.c"
test -s "$work/baryons.c"
cc -Wall -Werror -o "$work/baryons" "$work/baryons.c" $(pkg-config --cflags --libs jeansgrow)
out=$(cd "$src" && LD_LIBRARY_PATH="$libdir" "$work/baryons")
echo "$out"
test "$(echo "$out" | grep -c '^Omega_b h^2 = .*: M_F(z = 20) = .* Msun$')" -eq 3

# The installed Python package finds the installed library by itself.
if [ -x /usr/bin/python3 ]; then
  pydir=$(ls -d "$work"/prefix/lib/python3*/dist-packages | head -n 1)
  (cd "$work" && env -u JEANSGROW_LIBRARY PYTHONPATH="$pydir" /usr/bin/python3 -c "
import jeansgrow, jeansgrow._library as l
assert l.lib._name.startswith('$work/prefix/'), l.lib._name
e = jeansgrow.compute('epochs', '$work/prefix/share/jeansgrow/params/reference.cfg')
print('installed Python package:', jeansgrow.__file__, 'z_star', e['z_star'])")
fi

#!/bin/sh
# tests/cli/test_install.sh - the library as a user installs it: make install
# into a temporary prefix (with DESTDIR), then a small C program built
# against it with pkg-config, once shared and once static, run and checked.
# Usage: test_install.sh BUILD/lamina   (run from the repository root)
set -u
LC_ALL=C; export LC_ALL
BIN=${1:-build/lamina}
B=$(dirname "$BIN")
T=$(mktemp -d "${TMPDIR:-/tmp}/lamina-install.XXXXXX")
trap 'rm -rf "$T"' EXIT
pass=0; fail=0
ok()  { pass=$((pass + 1)); [ "${LAM_TEST_VERBOSE:-0}" = 1 ] && echo "test_install PASS: $1"; return 0; }
bad() { fail=$((fail + 1)); echo "test_install FAIL: $1"; }

# The build's sanitizer flags (make asan passes SANITIZE down) go to the
# test program too, or an instrumented library would not load.
SAN=${SANITIZE:+-fsanitize=$SANITIZE}
P=/opt/lamina-test
D="$T/root"
if make --no-print-directory -s BUILD="$B" PREFIX="$P" DESTDIR="$D" install > "$T/make.log" 2>&1; then
    ok "make install PREFIX=$P DESTDIR=..."
else
    bad "make install failed: $(tail -5 "$T/make.log")"
    echo "test_install: $pass passed, $fail failed"; exit 1
fi
R="$D$P"
for f in bin/lamina share/man/man1/lamina.1 share/lamina/calib/default-setup.json \
         lib/liblamina.a lib/liblamina.so lib/pkgconfig/lamina.pc include/lamina/lamina.h; do
    [ -e "$R/$f" ] && ok "installed $f" || bad "missing $f"
done
soname=$(objdump -p "$R/lib/liblamina.so" 2>/dev/null | awk '/SONAME/ { print $2 }')
[ -n "$soname" ] && [ -e "$R/lib/$soname" ] && ok "shared library has a soname ($soname) that is installed" \
    || bad "soname '$soname'"
# the umbrella header names every public header
missing=""
for h in include/lamina/*.h; do
    b=$(basename "$h")
    [ "$b" = lamina.h ] && continue
    grep -q "#include \"lamina/$b\"" include/lamina/lamina.h || missing="$missing $b"
    [ -e "$R/include/lamina/$b" ] || missing="$missing (not installed: $b)"
done
[ -z "$missing" ] && ok "lamina.h includes every public header" || bad "lamina.h misses:$missing"

# The program: sigma0 = e^2/(4 hbar) and the default setup's 1L contrast.
cat > "$T/prog.c" <<'EOF'
#include <lamina/lamina.h>
#include <stdio.h>
int main(void)
{
    lam_error_init_gsl();
    lam_setup s;
    lam_setup_default(&s);
    lam_model *m = NULL;
    lam_prediction p;
    lam_error err;
    lam_error_clear(&err);
    if (lam_model_alloc(&s, 1, 0, &m, &err) || lam_model_eval(m, 285, 0.2, &p, &err)) {
        fprintf(stderr, "%s\n", err.message);
        return 1;
    }
    printf("%s %.6e %.6f %.6f %.6f\n", LAMINA_VERSION, lam_sigma0_siemens(), p.contrast[1][0],
           p.contrast[1][1], p.contrast[1][2]);
    lam_model_free(m);
    lam_setup_clear(&s);
    return 0;
}
EOF
# the pc file carries the real prefix; point pkg-config at the staged copy
sed "s|^prefix=.*|prefix=$R|; s|^libdir=.*|libdir=$R/lib|; s|^includedir=.*|includedir=$R/include|" \
    "$R/lib/pkgconfig/lamina.pc" > "$T/lamina.pc"
grep -q "^Requires.private:.*libpng.*libjpeg.*gsl.*libcjson.*zlib" "$T/lamina.pc" \
    && ok "lamina.pc lists the libraries behind the static library" || bad "lamina.pc: $(cat "$T/lamina.pc")"
export PKG_CONFIG_PATH="$T${PKG_CONFIG_PATH:+:$PKG_CONFIG_PATH}"
version=$(sed -n 's/.*LAMINA_VERSION "\(.*\)".*/\1/p' include/lamina/version.h)
[ "$(pkg-config --modversion lamina)" = "$version" ] && ok "pkg-config knows lamina $version" \
    || bad "pkg-config --modversion lamina: $(pkg-config --modversion lamina 2>&1)"
# reference: the 1L row of the built tool on the same default setup
want=$("$BIN" predict --format csv --layers 1-1 | awk -F, 'NR == 2 { printf "%s %s %s", $2, $3, $4 }')
for kind in shared static; do
    flags=$(if [ $kind = static ]; then pkg-config --static --cflags --libs lamina; \
            else pkg-config --cflags --libs lamina; fi)
    if [ $kind = static ]; then
        # the static archive by path, so the linker cannot pick the .so
        flags=$(echo "$flags" | sed "s|-llamina|$R/lib/liblamina.a|")
    fi
    # shellcheck disable=SC2086
    if ${CC:-cc} -std=c11 -pedantic -Wall -Wextra -Werror $SAN "$T/prog.c" $flags -o "$T/prog-$kind" 2> "$T/cc.log"; then
        ok "builds $kind with pkg-config"
    else
        bad "build $kind: $(head -5 "$T/cc.log")"; continue
    fi
    out=$(LD_LIBRARY_PATH="$R/lib" "$T/prog-$kind") || { bad "run $kind: $out"; continue; }
    if [ $kind = shared ]; then
        LD_LIBRARY_PATH="$R/lib" ldd "$T/prog-$kind" | grep -q "$R/lib/$soname" \
            && ok "the shared build loads the installed $soname" || bad "shared build does not load $soname"
    fi
    # sigma0 = e^2 / (4 hbar) = 6.0853e-5 S with the exact SI e and hbar (CODATA 2018)
    set -- $out
    [ "$1" = "$version" ] && ok "$kind: version $1" || bad "$kind: version '$1'"
    awk -v s="$2" 'BEGIN { e = 1.602176634e-19; hb = 1.054571817e-34; r = e * e / (4 * hb);
                           exit !(s / r > 1 - 1e-6 && s / r < 1 + 1e-6) }' \
        && ok "$kind: sigma0 = $2 S (CODATA 2018 e, hbar)" || bad "$kind: sigma0 $2"
    [ "$3 $4 $5" = "$want" ] && ok "$kind: 1L contrast $3 $4 $5 equals lamina predict" \
        || bad "$kind: contrast '$3 $4 $5', lamina predict '$want'"
done
[ "$(LD_LIBRARY_PATH= ldd "$T/prog-static" 2>/dev/null | grep -c liblamina)" = 0 ] \
    && ok "the static build needs no liblamina.so" || bad "static build links liblamina.so"

if make --no-print-directory -s BUILD="$B" PREFIX="$P" DESTDIR="$D" uninstall > "$T/make.log" 2>&1 &&
   [ -z "$(find "$D" -type f -o -type l)" ]; then
    ok "make uninstall removes every installed file"
else
    bad "uninstall left: $(find "$D" -type f -o -type l | head -5)"
fi

echo "test_install: $pass passed, $fail failed"
[ "$fail" -eq 0 ]

#!/bin/sh
# bench/code_metrics.sh - the figures of the code-hygiene goals (issue 11):
#   functions in src/ and how many run over 100 and 120 lines (signature
#   to closing brace; a definition is a line starting with '{' in column 0
#   after its signature, the project's brace style), the longest ones;
#   lines of src/cli/; the share of library .c lines (src/*.c) that carry
#   comment text; public prototypes (include/lamina/*.h) with no comment
#   (a comment on the line before, on one of its own lines, or before the
#   block of prototypes without blank lines that it belongs to).
# Usage: sh bench/code_metrics.sh [--list]   (run from the repository root)
set -eu
LC_ALL=C; export LC_ALL
list=${1:-}

# Function lengths over every .c file in src/ (library and CLI).
find src -name '*.c' | sort | xargs awk '
    FNR == 1 { sig = ""; sigline = 0; infn = 0 }
    !infn && /^[A-Za-z_].*\(/ && !/;[ \t]*$/ && !/^#/ { if (!sigline) { sig = $0; sigline = FNR } }
    !infn && /^[ \t]*$/ { sig = ""; sigline = 0 }
    !infn && /^\{/ && sigline {
        infn = 1
        name = sig; sub(/\(.*/, "", name); sub(/.*[ *]/, "", name)
        start = sigline; next
    }
    infn && /^\}/ {
        infn = 0; printf "%d %s %s\n", FNR - start + 1, name, FILENAME
        sig = ""; sigline = 0; next
    }
    !infn && /^[}]/ { sig = ""; sigline = 0 }
' | sort -rn > "${TMPDIR:-/tmp}/lamina-metrics.$$"
F="${TMPDIR:-/tmp}/lamina-metrics.$$"
trap 'rm -f "$F"' EXIT
total=$(wc -l < "$F")
over100=$(awk '$1 > 100' "$F" | wc -l)
over120=$(awk '$1 > 120' "$F" | wc -l)
over80=$(awk '$1 > 80' "$F" | wc -l)
echo "functions in src/: $total; over 80 lines: $over80; over 100: $over100; over 120: $over120"
if [ "$list" = --list ]; then limit=0; else limit=80; fi
awk -v l=$limit '$1 > l { printf "  %4d %s (%s)\n", $1, $2, $3 }' "$F"

echo "lines in src/cli/: $(cat src/cli/*.c src/cli/*.h | wc -l)"

# Comment share of library .c lines: a line counts when any of it is
# comment text (inside /* */ or after //; string literals are not parsed,
# which the code base does not need).
awk '
    {
        n++; line = $0; has = 0
        if (inc) has = 1
        while (line != "") {
            if (inc) {
                e = index(line, "*/")
                if (!e) { line = ""; break }
                inc = 0; line = substr(line, e + 2)
            } else {
                b = index(line, "/*"); s = index(line, "//")
                if (s && (!b || s < b)) { has = 1; break }
                if (!b) break
                has = 1; inc = 1; line = substr(line, b + 2)
            }
        }
        c += has
    }
    END { printf "library .c lines: %d, with comments: %d (%.1f %%)\n", n, c, 100 * c / n }
' src/*.c

# Undocumented public prototypes.
awk '
    FNR == 1 { prevcomment = 0; blockdoc = 0; inproto = 0; incomment = 0 }
    {
        line = $0
        if (incomment) { if (index(line, "*/")) { incomment = 0; prevcomment = 1 } ; next }
        if (line ~ /^[ \t]*\/\*/ ) {
            if (!index(line, "*/")) incomment = 1; else prevcomment = 1
            next
        }
        if (line ~ /^[ \t]*$/) { prevcomment = 0; blockdoc = 0; next }
        if (line ~ /^struct [A-Za-z_]+;/) next  # a forward declaration keeps the comment
        if (line ~ /^(extern|#define)/) { blockdoc = blockdoc || prevcomment; next }
        if (!inproto && line ~ /^[A-Za-z_].*\(/ && line !~ /^(typedef|#|struct [a-z_]+;|extern)/) {
            inproto = 1; doc = prevcomment || blockdoc; text = ""
        }
        if (inproto) {
            text = text line
            if (index(line, "/*")) doc = 1
            if (line ~ /;[ \t]*(\/\*.*)?$/) {
                inproto = 0; total++
                if (doc) blockdoc = 1
                else { undoc++; nm = text; sub(/\(.*/, "", nm); sub(/.*[ *]/, "", nm)
                       printf "  undocumented: %s (%s)\n", nm, FILENAME }
            }
            prevcomment = 0
            next
        }
        prevcomment = 0
        if (line !~ /^[ \t]/) blockdoc = 0
    }
    END { printf "public prototypes: %d, undocumented: %d\n", total, undoc }
' include/lamina/*.h | { if [ "$list" = --list ]; then cat; else grep -v '^  undocumented'; fi; }

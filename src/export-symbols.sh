#!/bin/sh
# export-symbols.sh HEADER...: print, one per line and sorted, the name of
# every twf_* function declared in the given headers. The build hands the
# list to libtool (-export-symbols) so that the shared library exports the
# public interface and nothing else: a function declared in a public header
# is exported without anyone editing a list, an internal helper never is.
#
# Plain awk on the header text, not the compiler: the list must come out the
# same with every C compiler the build accepts. What it understands is the
# header style of src/include/twistfit/: comments, preprocessor lines (with
# continuations), declarations ending in ';'. A declaration counts when a
# twf_* name is followed by '(' outside any parentheses; function pointer
# types (name inside parentheses), typedefs and static inline definitions do
# not count. tests/check-exports.sh checks the result against the compiler's
# own list of declarations and the library's dynamic symbols.
set -eu
[ $# -gt 0 ] || { echo "usage: $0 HEADER..." >&2; exit 2; }
for h in "$@"; do
  [ -r "$h" ] || { echo "$0: cannot read $h" >&2; exit 1; }
done
awk '
# Strip comments (they may span lines) and preprocessor lines, then cut the
# text into statements at ";", "{" and "}"; only statements outside braces
# (or inside extern "C" braces) are looked at.
function flush(   s, i, c, par, name) {
  s = stmt
  stmt = ""
  if (s ~ /(^|[^A-Za-z0-9_])(typedef|static)([^A-Za-z0-9_]|$)/)
    return
  par = 0
  for (i = 1; i <= length(s); i++) {
    c = substr(s, i, 1)
    if (c == "(") { par++; continue }
    if (c == ")") { par--; continue }
    if (par == 0 && c == "t" && substr(s, i, 4) == "twf_" &&
        (i == 1 || substr(s, i - 1, 1) !~ /[A-Za-z0-9_]/)) {
      name = substr(s, i)
      if (match(name, /^twf_[A-Za-z0-9_]*[ \t]*\(/)) {
        name = substr(name, 1, RLENGTH - 1)
        sub(/[ \t]+$/, "", name)
        print name
        return
      }
    }
  }
}
FNR == 1 { incomment = 0; continued = 0; stmt = ""; depth = 0; hidden = 0 }
{
  line = $0
  out = ""
  while (line != "") {
    if (incomment) {
      i = index(line, "*/")
      if (i == 0) { line = ""; break }
      line = substr(line, i + 2)
      incomment = 0
    } else {
      i = index(line, "/*")
      j = index(line, "//")
      if (j > 0 && (i == 0 || j < i)) { out = out substr(line, 1, j - 1); break }
      if (i == 0) { out = out line; break }
      out = out substr(line, 1, i - 1) " "
      line = substr(line, i + 2)
      incomment = 1
    }
  }
  if (continued || out ~ /^[ \t]*#/) {
    continued = (out ~ /\\[ \t]*$/)
    next
  }
  while (match(out, /[;{}]/)) {
    # flush() calls match() too: keep this position first
    at = RSTART
    c = substr(out, at, 1)
    stmt = stmt " " substr(out, 1, at - 1)
    out = substr(out, at + 1)
    if (c == "{") {
      # only an extern "C" block holds declarations; the inside of a
      # struct, enum or function body does not
      depth++
      plain[depth] = (stmt ~ /extern[ \t]*"C"[ \t]*$/)
      if (!plain[depth])
        hidden++
      stmt = ""
    } else if (c == "}") {
      if (depth > 0 && !plain[depth])
        hidden--
      if (depth > 0)
        depth--
      stmt = ""
    } else if (hidden > 0) {
      stmt = ""
    } else {
      flush()
    }
  }
  stmt = stmt " " out
}
' "$@" | LC_ALL=C sort -u

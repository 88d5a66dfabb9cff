#!/usr/bin/env bash
# crosscheck CI gate: check case files, write JUnit XML, a Markdown summary and an HTML report
# into one folder, and exit with crosscheck's own exit code (see ci/README.md).
set -u

usage() {
  cat <<'TEXT'
Usage: crosscheck-gate.sh [--out DIR] [--lenient] PATH... [-- VERIFY_OPTION...]

Runs `crosscheck verify` on the case files (*.toml) in each PATH (files or folders) and
writes, into DIR (default: crosscheck-reports):
  crosscheck.xml   JUnit XML, for the CI server's test view
  crosscheck.md    Markdown summary, for a pull-request comment or a job summary
  crosscheck.html  one self-contained HTML report with plots, to keep as an artifact
Options after `--` go to the `crosscheck verify` run unchanged (e.g. -- --timeout 120
--baseline equivalents.json).

The gate runs verify with --strict: a reading warning (no AC source, an element on the
title line, a suffix SPICE misreads) that the case file does not acknowledge with
accept_warnings = ["CODE"] is an error (exit 3). --lenient leaves --strict out: warnings
are then reported in every format but change no exit code.

Exit code: crosscheck's own: 0 pass, 1 fail, 2 usage, 3 error (invalid input or engine
crash), 4 unavailable (an engine could not produce a quantity), 5 drift from the baseline.

Environment: CROSSCHECK  the command to run (default: `crosscheck` on PATH, else
                         `python3 -I -m crosscheck`, isolated: never the PR's own modules).
TEXT
}

out="crosscheck-reports"
strict=(--strict)
paths=()
extra=()
while [ $# -gt 0 ]; do
  case "$1" in
    -h|--help) usage; exit 0 ;;
    -o|--out)
      if [ $# -lt 2 ] || [ -z "$2" ]; then echo "crosscheck-gate: $1 needs a folder name" >&2; usage >&2; exit 2; fi
      out="$2"; shift 2 ;;
    --out=*) out="${1#--out=}"; shift ;;
    --lenient) strict=(); shift ;;
    --) shift; extra=("$@"); break ;;
    -*) echo "crosscheck-gate: unknown option $1 (verify options go after --)" >&2; usage >&2; exit 2 ;;
    *) paths+=("$1"); shift ;;
  esac
done
if [ ${#paths[@]} -eq 0 ]; then
  echo "crosscheck-gate: name at least one case file or folder" >&2
  usage >&2
  exit 2
fi

if [ -n "${CROSSCHECK:-}" ]; then
  read -r -a cmd <<< "$CROSSCHECK"
elif command -v crosscheck >/dev/null 2>&1; then
  cmd=(crosscheck)
else
  # -I (isolated mode): the working directory -- the pull request's tree -- is not put first on
  # sys.path, and PYTHON* variables and the user's site folder are ignored, so a module the PR adds
  # at its root (argparse.py, json.py, crosscheck/...) cannot stand in for the installed one.
  cmd=(python3 -I -m crosscheck)
fi

mkdir -p "$out" || { echo "crosscheck-gate: cannot create $out" >&2; exit 2; }

# One verify run writes all three reports (each --output file's extension names its format).
"${cmd[@]}" verify "${paths[@]}" --output "$out/crosscheck.xml" --output "$out/crosscheck.md" \
  --output "$out/crosscheck.html" ${strict[@]+"${strict[@]}"} ${extra[@]+"${extra[@]}"}
code=$?
if [ $code -eq 2 ] || [ ! -s "$out/crosscheck.md" ]; then
  echo "crosscheck-gate: crosscheck verify exited $code without a report; see its message above" >&2
  exit $code
fi

head -n 1 "$out/crosscheck.md" | sed 's/^#* *//'
echo "reports: $out/crosscheck.xml $out/crosscheck.md $out/crosscheck.html"
exit $code

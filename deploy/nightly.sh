#!/usr/bin/env bash
# The nightly refresh: train a fresh ensemble with `chorus run`, then hand its bundle to
# `chorus promote`, which makes it the registry's current bundle only if the gate passes, and
# redraw the registry's history page with `chorus history`.
# deploy/systemd/chorus-nightly.service runs it (installed as /usr/local/bin/chorus-nightly);
# it works the same from cron or by hand. Environment [default]:
#   CHORUS_CONFIG      the run's config [/etc/chorus/nightly.yaml]
#   CHORUS_RUNS        each night's run directory goes under CHORUS_RUNS/<UTC time>/
#                      [/var/lib/chorus/runs]
#   CHORUS_REGISTRY    the registry [/var/lib/chorus/registry]
#   CHORUS_KEEP_RUNS   nights of run directories kept [14]
#   CHORUS_BIN         directory holding chorus and chorus-worker [/usr/local/bin]
#   CHORUS_LOG_FORMAT  text | json [json]
# Exit status: chorus run's if it failed, else chorus promote's: 0 promoted, 3 refused by the
# gate (the current bundle stays; the decision is written into the registry), 2 bad input.
set -euo pipefail

config="${CHORUS_CONFIG:-/etc/chorus/nightly.yaml}"
runs="${CHORUS_RUNS:-/var/lib/chorus/runs}"
registry="${CHORUS_REGISTRY:-/var/lib/chorus/registry}"
keep="${CHORUS_KEEP_RUNS:-14}"
bin="${CHORUS_BIN:-/usr/local/bin}"
log_format="${CHORUS_LOG_FORMAT:-json}"

# One log line on stderr, in the same format as chorus's own.
log() {
  local level="$1" msg="$2"
  if [ "$log_format" = json ]; then
    msg="${msg//\\/\\\\}"
    msg="${msg//\"/\\\"}"
    printf '{"time":"%s","level":"%s","msg":"nightly: %s"}\n' \
      "$(date -u +%Y-%m-%dT%H:%M:%S.%3NZ)" "$level" "$msg" >&2
  else
    printf 'nightly: %s\n' "$msg" >&2
  fi
}

# A new parent directory per night, so the run directory is the only one inside it.
out="$runs/$(date -u +%Y%m%dT%H%M%SZ)"
mkdir -p "$runs"
mkdir "$out"
log info "training $config into $out"
rc=0
"$bin/chorus" run "$config" --out "$out" --log-format "$log_format" > "$out/summary.txt" || rc=$?
if [ "$rc" -ne 0 ]; then
  log error "chorus run failed with exit status $rc; the current bundle stays"
  exit "$rc"
fi
run_dir="$(find "$out" -mindepth 1 -maxdepth 1 -type d ! -name '.*' | head -n 1)"

"$bin/chorus" promote "$run_dir" --registry "$registry" --log-format "$log_format" || rc=$?
case "$rc" in
  0) log info "the registry's current bundle is $run_dir's" ;;
  3) log warning "the gate refused $run_dir; the current bundle stays" ;;
  *) log error "chorus promote failed with exit status $rc" ;;
esac

# The registry's history page (DIR/history.html): every kept decision and rollback over time.
# It does not change the night's exit status.
if [ "$rc" -eq 0 ] || [ "$rc" -eq 3 ]; then
  "$bin/chorus" history --registry "$registry" --log-format "$log_format" > /dev/null ||
    log warning "chorus history failed; the registry is unchanged"
fi

# Older nights' run directories (names sort by time); the registry keeps its own versions.
find "$runs" -mindepth 1 -maxdepth 1 -type d -name '[0-9]*Z' | sort | head -n "-$keep" |
  while read -r old; do rm -rf -- "$old"; done
exit "$rc"

#!/usr/bin/env bash
# The nightly refresh: train a fresh ensemble with `chorus run` (warm-started from the registry's
# current bundle when the config's train.warm_start names the registry), then hand its bundle to
# `chorus promote`, which makes it the registry's current bundle only if the gate passes (scores
# and training-data shift), export the current bundle to ONNX with `chorus export`, and redraw
# the registry's history page with `chorus history`.
# deploy/systemd/chorus-nightly.service runs it (installed as /usr/local/bin/chorus-nightly);
# it works the same from cron or by hand. Environment [default]:
#   CHORUS_CONFIG      the run's config [/etc/chorus/nightly.yaml]
#   CHORUS_RUNS        each night's run directory goes under CHORUS_RUNS/<UTC time>/
#                      [/var/lib/chorus/runs]
#   CHORUS_REGISTRY    the registry [/var/lib/chorus/registry]
#   CHORUS_KEEP_RUNS   nights of run directories kept [14]
#   CHORUS_BIN         directory holding chorus and chorus-worker [/usr/local/bin]
#   CHORUS_LOG_FORMAT  text | json [json]
#   CHORUS_ONNX        where the current bundle's ONNX model is written after each promotion
#                      [$CHORUS_REGISTRY/current.onnx]
# Exit status: chorus run's if it failed, else chorus promote's: 0 promoted, 3 refused by the
# gate (the current bundle stays; the decision is written into the registry), 2 bad input; or
# chorus export's if the promoted bundle could not be exported.
set -euo pipefail

config="${CHORUS_CONFIG:-/etc/chorus/nightly.yaml}"
runs="${CHORUS_RUNS:-/var/lib/chorus/runs}"
registry="${CHORUS_REGISTRY:-/var/lib/chorus/registry}"
keep="${CHORUS_KEEP_RUNS:-14}"
bin="${CHORUS_BIN:-/usr/local/bin}"
log_format="${CHORUS_LOG_FORMAT:-json}"
onnx="${CHORUS_ONNX:-$registry/current.onnx}"

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
# An empty registry until the first promotion (chorus promote completes it), so that a config
# warm-starting from it finds no current bundle on the first night and starts cold.
mkdir -p "$registry/versions"
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

# The ONNX model of the current bundle, written atomically, so a server watching the file never
# reads half of one. Only after a promotion: a refused candidate leaves the served model as is.
if [ "$rc" -eq 0 ]; then
  "$bin/chorus" export "$registry/current/bundle.chorus" --onnx "$onnx" \
    --log-format "$log_format" || rc=$?
  if [ "$rc" -ne 0 ]; then
    log error "chorus export failed with exit status $rc; $onnx is not the current bundle's"
  fi
fi

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

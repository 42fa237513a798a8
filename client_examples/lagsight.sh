#!/usr/bin/env bash
# Call the Lagsight service with curl and print the verdict and the lags outside the band (needs curl and jq).
#
#   ./lagsight.sh single demo_payloads/bakery_daily_residuals.json
#   ./lagsight.sh batch  demo_payloads/retail_weekly_batch_500.json
#   ./lagsight.sh model-check demo_payloads/dairy_daily_milk_intake_model_check.json
#   ./lagsight.sh stability demo_payloads/bus_line_daily_boardings_stability.json
#   ./lagsight.sh driver-check demo_payloads/district_heating_daily_demand_drivers.json
#
# Environment: LAGSIGHT_URL (default http://127.0.0.1:8000), LAGSIGHT_TIMEOUT in seconds (default 30),
# LAGSIGHT_TOKEN (bearer token, only where the deployment requires one).
# Exit codes: 0 answered, 2 the service refused the request (problem details printed), 3 no answer.
set -euo pipefail

usage() { echo "usage: $0 single|batch|model-check|stability|driver-check PAYLOAD.json" >&2; exit 64; }
[ $# -eq 2 ] || usage
case "$1" in
  single) route=/v1/diagnostics ;;
  batch) route=/v1/diagnostics/batch ;;
  model-check) route=/v1/model-check ;;
  stability) route=/v1/stability ;;
  driver-check) route=/v1/driver-check ;;
  *) usage ;;
esac
payload=$2
base=${LAGSIGHT_URL:-http://127.0.0.1:8000}
timeout=${LAGSIGHT_TIMEOUT:-30}

headers=(-H 'Content-Type: application/json' -H 'Accept: application/json')
if [ -n "${LAGSIGHT_TOKEN:-}" ]; then headers+=(-H "Authorization: Bearer ${LAGSIGHT_TOKEN}"); fi

answer=$(mktemp)
trap 'rm -f "$answer"' EXIT

# --max-time bounds the whole exchange; -w prints the status and media type after the body is saved.
set +e
meta=$(curl -sS --max-time "$timeout" -o "$answer" -w '%{http_code} %{content_type}' \
       -X POST "${headers[@]}" --data-binary "@${payload}" "${base}${route}")
rc=$?
set -e
if [ $rc -ne 0 ]; then
  if [ $rc -eq 28 ]; then echo "error: no answer from ${base} within ${timeout} s" >&2
  else echo "error: could not reach ${base} (curl exit code ${rc})" >&2; fi
  exit 3
fi
status=${meta%% *}
media=${meta#* }

if [ "${status:0:1}" != "2" ]; then
  if [[ "$media" == application/problem+json* ]]; then
    jq -r '"error \(.status) (\(.title)): \(.detail)", ((.errors // [])[] | "  \(.pointer): \(.detail)")' "$answer" >&2
  else
    echo "error ${status}: $(head -c 200 "$answer")" >&2
  fi
  exit 2
fi

# shellcheck disable=SC2016
filters='
  def word: if . == true then "white noise" elif . == false then "not white noise" else "no judgement" end;
  def lags: if length == 0 then "none" else map(tostring) | join(", ") end;'
if [ "$1" = single ]; then
  jq -r "$filters"'
    (.name // "(unnamed)"),
    "verdict: \(.verdict.white_noise | word)",
    "summary: \(.verdict.summary)",
    "outside the band (ACF): \(.acf.outside | lags)",
    "outside the band (PACF): \(.pacf.outside | lags)"' "$answer"
elif [ "$1" = model-check ]; then
  jq -r "$filters"'
    (.name // "(unnamed)"),
    "model: \(.model.label) (chosen by \(.model.chosen_by))",
    "before: \(.comparison.before.white_noise | word)",
    "residuals: \(.comparison.after.white_noise | word)",
    "\(.comparison.sentence)"' "$answer"
elif [ "$1" = stability ]; then
  jq -r '
    (.name // "(unnamed)"),
    (.counts | "windows: \(.windows) (\(.white_noise) white noise, \(.not_white_noise) not white noise, \(.undetermined) undetermined, \(.errors) error\(if .errors == 1 then "" else "s" end))"),
    (if .changes.found == null then "changes: not computed"
     elif (.changes.found | length) == 0 then "changes: none found"
     else (.changes.found[] | "change: \(.kind) at \(.time // "index \(.index)"), p = \(.p_value)") end)' "$answer"
elif [ "$1" = driver-check ]; then
  jq -r '
    (.name // "(unnamed)"),
    (.drivers[] | if .moves_with_series then "\(.name): linked at lags \(.key_lags | map(tostring) | join(", ")) (\(.direction))"
                  else "\(.name): no link found" end)' "$answer"
else
  jq -r "$filters"'
    (.results[] | if .error then "\(.id): error \(.error.status): \(.error.detail)"
                  else "\(.id): \(.verdict.white_noise | word); ACF outside: \(.acf.outside | lags)" end),
    (.summary | "summary: \(.white_noise) white noise, \(.not_white_noise) not white noise, \(.undetermined) undetermined, \(.errors) error\(if .errors == 1 then "" else "s" end)")' "$answer"
fi

#!/bin/sh
# The HTTP API from a shell, one call per resource. Start the service first
# (`make demo` or `.venv/bin/cycleledger serve`), then:
#     sh examples/curl.sh [BASE_URL]
# Uses the demo recording (examples/data/, written by examples/make_demo.py when missing).
set -eu
B=${1:-http://127.0.0.1:8350}
HERE=$(dirname "$0")
CSV=$HERE/data/loader_arm_rig.csv
# PYTHON: a Python with cycleledger installed (the demo generator is in the package).
[ -f "$CSV" ] || "${PYTHON:-python3}" "$HERE/make_demo.py" "$CSV" >/dev/null

echo "== upload (CSV; time_s sets the sample rate; microstrain needs E)"
H=$(curl -sf -X POST "$B/v1/histories?unit=microstrain&youngs_modulus=206000&name=rig-run" \
        -H 'Content-Type: text/csv' --data-binary @"$CSV")
echo "$H"
HID=$(printf '%s' "$H" | python3 -c 'import json,sys; print(json.load(sys.stdin)["id"])')

echo "== assess two gauges (201 with the result, or 202 with a job for large requests)"
A=$(curl -sf -X POST "$B/v1/assessments" -H 'Content-Type: application/json' -d '{
      "history_id": "'"$HID"'", "gate_fraction": 0.02,
      "settings": {"curve": "EN1993-1-9:71"},
      "points": {"weld_toe_upper": {}, "cylinder_mount": {"curve": "IIW:FAT80",
                                                          "allowable_damage": 0.5}}}')
field() { python3 -c 'import json,sys; d=json.load(sys.stdin); print(eval("d"+sys.argv[1]))' "$1"; }
if [ "$(printf '%s' "$A" | field '.get("kind", "")')" = "assessment" ]; then
    # 202: a job. Poll it until it ends, then follow its result link.
    JOB=$(printf '%s' "$A" | field '["links"]["self"]')
    while :; do
        J=$(curl -sf "$B$JOB")
        S=$(printf '%s' "$J" | field '["state"]')
        echo "job $S $(printf '%s' "$J" | field '["progress"]["fraction"]')"
        [ "$S" = done ] && break
        [ "$S" = failed ] && { echo "$J"; exit 1; }
        sleep 0.5
    done
    A=$(curl -sf "$B$(printf '%s' "$J" | field '["links"]["result"]')")
fi
AID=$(printf '%s' "$A" | field '["id"]')

echo "== summary as CSV"
curl -sf "$B/v1/assessments/$AID/summary" -H 'Accept: text/csv'
echo "== first lines of a cycle table"
curl -sf "$B/v1/assessments/$AID/points/weld_toe_upper/cycles?format=csv" | head -5
echo "== range-mean matrix (JSON), the catalogue, a problem"
curl -sf "$B/v1/assessments/$AID/points/weld_toe_upper/range-mean?range_bins=8&mean_bins=4" | head -c 300; echo
curl -sf "$B/v1/curves/DNV-RP-C203:D"; echo
curl -s -X POST "$B/v1/assessments" -H 'Content-Type: application/json' \
     -d '{"history_id": "'"$HID"'", "settings": {"curve": "EN1993-1-9:72"}}' | head -c 300; echo

echo "== a duty cycle: the rig run as 1 h of a 200 h target, with a what-if"
D=$(curl -sf -X POST "$B/v1/duty-cycles" -H 'Content-Type: application/json' -d '{
      "name": "rig run, 200 h", "target": {"hours": 200},
      "events": [{"name": "dig and dump", "assessment_id": "'"$AID"'", "hours": 1}],
      "variants": [{"name": "category 90", "settings": {"curve": "EN1993-1-9:90"}}]}')
printf '%s' "$D" | field '["passed"]'
DID=$(printf '%s' "$D" | field '["id"]')
curl -sf -X POST "$B/v1/duty-cycles/$DID/what-if" -H 'Content-Type: application/json' \
     -d '{"variants": [{"name": "10 % more load", "load_scale": 1.1}]}' | head -c 300; echo
echo "== the matrix extrapolated to ten times the usage"
curl -sf "$B/v1/assessments/$AID/points/weld_toe_upper/extrapolation?factor=10" \
    | field '["extrapolation_effect"]'
echo "== a shorter drive signal keeping 95 % of each gauge's damage"
E=$(curl -sf -X POST "$B/v1/edits" -H 'Content-Type: application/json' -d '{
      "history_id": "'"$HID"'", "channels": ["weld_toe_upper", "cylinder_mount"],
      "settings": {"curve": "EN1993-1-9:71"}, "keep": 0.95, "window_s": 0.5}')
printf '%s' "$E" | field '["result"]["length_kept"]'
curl -sf "$B$(printf '%s' "$E" | field '["links"]["signal"]')?format=csv" | head -3
echo "== one gauge as a PSD (Welch), assessed by the spectral methods"
curl -sf -X POST "$B/v1/spectra" -H 'Content-Type: application/json' -d '{
      "settings": {"curve": "EN1993-1-9:71"}, "methods": ["dirlik", "narrow_band"],
      "load_cases": [{"history_id": "'"$HID"'", "channel": "weld_toe_upper",
                      "exposure_s": 3600}]}' | field '["result"]["methods"]["dirlik"]["damage"]'

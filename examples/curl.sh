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

#!/usr/bin/env bash
# The demo: the Kestrel Sound capture through sdrx's main jobs. Run it with `make demo`.
set -euo pipefail
cd "$(dirname "$0")/.."
SDRX=.venv/bin/sdrx
OUT=demo_out
mkdir -p "$OUT"

echo "== 1. regenerate the demo capture from its scenario and check it is byte-identical"
$SDRX synth demo_signals/coast.toml -o "$OUT/coast.sigmf-meta" --force --quiet
cmp "$OUT/coast.sigmf-data" demo_signals/coast.sigmf-data && echo "   identical to demo_signals/coast.sigmf-data"

echo "== 2. survey the carriers in the shipped capture"
$SDRX info demo_signals/coast.sigmf-meta --spacing 10k

echo "== 3. receive 600 kHz (Skerry Point Relay sits on its image at 1510 kHz)"
$SDRX receive demo_signals/coast.sigmf-meta --tune 600k --chain medium \
    -o "$OUT/harbour-600k.wav" --summary "$OUT/harbour-600k.json" --force --quiet
$SDRX receive demo_signals/coast.sigmf-meta --tune 600k --chain demo_signals/no-preselector.toml \
    -o "$OUT/harbour-600k-no-preselector.wav" --summary "$OUT/harbour-600k-no-preselector.json" --force --quiet

echo "== 4. receive 1130 kHz (a weak station 10 kHz above it) through the narrow preset"
$SDRX receive demo_signals/coast.sigmf-meta --tune 1130k --chain narrow \
    -o "$OUT/tidewater-1130k.wav" --summary "$OUT/tidewater-1130k.json" --force --quiet

echo "== 5. selectivity and image report for 600 kHz"
$SDRX report medium --tune 600k --capture demo_signals/coast.sigmf-meta -o "$OUT/report" --force --quiet

echo "== 6. A/B listening page: wide against narrow on 1130 kHz"
$SDRX compare demo_signals/coast.sigmf-meta --tune 1130k wide narrow -o "$OUT/compare" \
    --blind 6 --seed 11 --force --quiet

echo "== 7. a faulty recording: DC offset, I/Q imbalance (a +20 dB station on the wanted one's mirror), 60 ppm"
$SDRX synth demo_signals/dongle.toml -o "$OUT/dongle.sigmf-meta" --force --quiet
# shared as a SigMF archive (a tar of the pair in a folder of its name); sdrx reads it in place
tar -cf "$OUT/dongle.sigmf" -C "$OUT" --transform 's,^,dongle/,' dongle.sigmf-meta dongle.sigmf-data
$SDRX info "$OUT/dongle.sigmf" --quiet
$SDRX receive "$OUT/dongle.sigmf" --tune 1050k -o "$OUT/saltmarsh-as-recorded.wav" \
    --summary "$OUT/saltmarsh-as-recorded.json" --force --quiet 2>/dev/null
$SDRX receive "$OUT/dongle.sigmf" --tune 1050k --correct all -o "$OUT/saltmarsh-corrected.wav" \
    --summary "$OUT/saltmarsh-corrected.json" --force --quiet 2>/dev/null
.venv/bin/python - "$OUT/saltmarsh-corrected.json" <<'PY'
import json, sys
c = json.load(open(sys.argv[1]))["corrections"]["applied"]
print(f"   corrected: DC {c['dc']['dbfs']:.1f} dBFS removed; I/Q {c['iq']['gain_error_db']:+.2f} dB, "
      f"{c['iq']['phase_error_deg']:+.2f} deg undone (mirror rejection was {c['iq']['mirror_rejection_db']:.1f} dB); "
      f"clock {c['clock']['ppm']:+.2f} ppm undone")
PY

echo "== 8. every station of the capture at once: WAVs, level log, overview page"
$SDRX band demo_signals/coast.sigmf-meta -o "$OUT/band" --force --quiet

echo
echo "Demo outputs in $OUT/:"
echo "  audio:     $OUT/harbour-600k.wav, $OUT/harbour-600k-no-preselector.wav, $OUT/tidewater-1130k.wav"
echo "  summaries: $OUT/harbour-600k.json, $OUT/harbour-600k-no-preselector.json, $OUT/tidewater-1130k.json"
echo "  report:    $OUT/report/report.html"
echo "  compare:   $OUT/compare/index.html"
echo "  faults:    $OUT/saltmarsh-as-recorded.wav (as recorded), $OUT/saltmarsh-corrected.wav (--correct all)"
echo "  band:      $OUT/band/index.html (one WAV per station, band.json, log.csv)"

#!/usr/bin/env bash
# End-to-end runs of the built binary on every preset: exit codes, JSON that parses,
# and nothing on stdout when the input is bad. Usage: cli_end_to_end.sh PINCHOFF PRESETS
# [sanitized]. In the sanitizer build ("sanitized") the run over the presets takes three of
# them, a source follower fed by a capsule, a buffer fed by a pickup and a chain with its
# stages DC-coupled, which between them reach every topology and source kind the presets
# hold (the chain with a volume pot between its stages is run after the loop); the other
# presets' runs repeat those code paths, each a sanitized program start. It also renders and
# measures a tone of 0.5 s rather than 2 s, and fills /dev/full with a spread report of 200
# runs rather than 3000 (22 KB, still several times an output buffer): the same commands
# and checks on less audio and fewer rows.
set -u
bin=$1
presets=$2
mode=${3:-full}
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
fail=0
check() { # description, expected status, command...
  local what=$1 want=$2
  shift 2
  "$@" >"$tmp/out" 2>"$tmp/err"
  local got=$?
  if [ "$got" -ne "$want" ]; then
    echo "FAIL: $what: exit $got, expected $want"; cat "$tmp/err"; fail=1
  fi
}
every_preset=("$presets"/*.toml)
tone_seconds=2
spread_rows=3000
if [ "$mode" = sanitized ]; then
  every_preset=("$presets/phantom-mic-follower.toml" "$presets/pickup-buffer-9v.toml" "$presets/buffered-boost-9v.toml")
  tone_seconds=0.5
  spread_rows=200
fi
for p in "${every_preset[@]}"; do
  [ "$(basename "$p")" = devices.toml ] && continue
  [ -f "$p" ] || { echo "FAIL: no preset $p"; fail=1; continue; }
  # A chain names its stages in keys and targets.
  stage1=""; grep -q '^\[\[stage\]\]' "$p" && stage1="stage1."
  check "bias $p" 0 "$bin" bias "$p"
  grep -q "^Operating point\|^Stage 1" "$tmp/out" || { echo "FAIL: bias $p printed no report"; fail=1; }
  check "bias --json $p" 0 "$bin" bias "$p" --json
  python3 -c 'import json,sys; json.load(open(sys.argv[1]))' "$tmp/out" || { echo "FAIL: bias --json $p is not JSON"; fail=1; }
  check "tune center $p" 0 "$bin" tune "$p" --target "${stage1}center"
  check "spread $p" 0 "$bin" spread "$p" --runs 100 --class general-purpose --plot "$tmp/h.svg"
  rsvg-convert "$tmp/h-vd.svg" -o "$tmp/h.png" || { echo "FAIL: spread histogram of $p does not render"; fail=1; }
  check "sweep $p" 0 "$bin" sweep "$p" --steps 5 --plot "$tmp/s.svg"
  rsvg-convert "$tmp/s.svg" -o "$tmp/s.png" || { echo "FAIL: sweep plot of $p does not render"; fail=1; }
  check "response $p" 0 "$bin" response "$p" --plot "$tmp/r.svg"
  rsvg-convert "$tmp/r.svg" -o "$tmp/r.png" || { echo "FAIL: response plot of $p does not render"; fail=1; }
  check "noise $p" 0 "$bin" noise "$p" --points 20 --plot "$tmp/n.svg"
  rsvg-convert "$tmp/n.svg" -o "$tmp/n.png" || { echo "FAIL: noise plot of $p does not render"; fail=1; }
done
check "missing file" 2 "$bin" bias "$tmp/none.toml"
[ -s "$tmp/out" ] && { echo "FAIL: output written for a missing file"; fail=1; }
printf '[supply]\nvolts = 9\n[jfet]\nidss = "5m"\nvp = -1\n[drain]\nresitor = 1\n' > "$tmp/typo.toml"
check "typo" 2 "$bin" bias "$tmp/typo.toml"
grep -q "typo.toml:7:1: unknown key 'resitor' in \[drain\]; did you mean 'resistor'" "$tmp/err" || { echo "FAIL: typo message"; cat "$tmp/err"; fail=1; }
check "tone" 0 "$bin" tone --freq 1k --level -10dBFS --seconds "$tone_seconds" "$tmp/tone.wav"
check "measure --json" 0 "$bin" measure "$tmp/tone.wav" --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert abs(j["fundamental_dbfs"]+10)<0.01 and abs(j["fundamental_hz"]-1000)<0.01' "$tmp/out" || { echo "FAIL: measure of the tone file"; fail=1; }
check "measure --against" 0 "$bin" measure "$tmp/tone.wav" --against "$presets/bass-booster-9v.toml" --drive 100mVpk --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert len(j["against"]["harmonics_dbc"]) == 9' "$tmp/out" || { echo "FAIL: measure --against JSON"; fail=1; }
check "compare" 0 "$bin" compare "$presets/bass-booster-9v.toml" "$presets/clean-preamp-18v.toml" "$presets/phantom-mic-follower.toml" --plot "$tmp/c.svg"
rsvg-convert "$tmp/c.svg" -o "$tmp/c.png" || { echo "FAIL: compare plot does not render"; fail=1; }
check "compare --json" 0 "$bin" compare "$presets/bass-booster-9v.toml" "$presets/bass-booster-9v.toml" --set 2:source.bypass_cap=0 --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert all(abs(d["output_dbu"]+10)<0.01 for d in j["designs"])' "$tmp/out" || { echo "FAIL: compare --json"; fail=1; }
check "compare at a bass frequency" 0 "$bin" compare "$presets/bass-booster-9v.toml" "$presets/clean-preamp-18v.toml" --freq 40
grep -q "1x oversampling (enough at this frequency" "$tmp/out" || { echo "FAIL: compare does not say it lowered the oversampling"; cat "$tmp/out"; fail=1; }
check "compare of one design" 2 "$bin" compare "$presets/bass-booster-9v.toml"
[ -s "$tmp/out" ] && { echo "FAIL: output written for compare of one design"; fail=1; }
check "render" 0 "$bin" render "$presets/bass-booster-9v.toml" --input "$tmp/tone.wav" --output "$tmp/rendered.wav" --quiet
check "render --noise" 0 "$bin" render "$presets/bass-booster-9v.toml" --input "$tmp/tone.wav" --output "$tmp/hiss.wav" --noise --seed 3 --quiet --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); n=j["outputs"][0]["noise"]; assert n["rms_v"] > 0 and n["scaled_by"] == "signal" and j["noise_seed"] == 3' "$tmp/out" || { echo "FAIL: render --noise JSON"; fail=1; }
check "bias --thd-levels --temperature" 0 "$bin" bias "$presets/bass-booster-9v.toml" --thd-levels --temperature 0..50 --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert len(j["headroom"]["thd_levels"]) == 3 and len(j["temperature"]["points"]) == 6' "$tmp/out" || { echo "FAIL: bias --thd-levels --temperature JSON"; fail=1; }
check "spread --noise" 0 "$bin" spread "$presets/phantom-mic-follower.toml" --runs 20 --class low-cutoff --noise --require ein_a=..-118 --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert "ein_a_dbu" in j["percentiles"]' "$tmp/out" || { echo "FAIL: spread --noise JSON"; fail=1; }
check "render refuses an existing output" 2 "$bin" render "$presets/bass-booster-9v.toml" --input "$tmp/tone.wav" --output "$tmp/rendered.wav"
[ -s "$tmp/out" ] && { echo "FAIL: output written for a refused render"; fail=1; }
check "measure of a non-audio file" 2 "$bin" measure "$tmp/typo.toml"
[ -s "$tmp/out" ] && { echo "FAIL: output written for a non-audio file"; fail=1; }
# A chain through the time-domain commands: the output at the load, the chain named as one.
chain="$presets/two-stage-boost-9v.toml"
check "sweep --json of a chain" 0 "$bin" sweep "$chain" --steps 4 --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert all(len(p["stages"]) == 2 and all(k in s for s in p["stages"] for k in ("output_vpk","thd_percent","harmonics_dbc","clean")) for p in j["points"]) and len(j["stages"]) == 2' "$tmp/out" || { echo "FAIL: sweep --json of a chain has no stages"; fail=1; }
check "sweep --plot of a chain" 0 "$bin" sweep "$chain" --steps 4 --plot "$tmp/sc.svg"
grep -q "THD at each stage" "$tmp/sc.svg" && grep -q "second stage" "$tmp/sc.svg" || { echo "FAIL: sweep plot of a chain has no stage panel"; fail=1; }
check "imd of a chain" 0 "$bin" imd "$chain" --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert j["imd_percent"] > 0' "$tmp/out" || { echo "FAIL: imd of a chain"; fail=1; }
check "compare with a chain" 0 "$bin" compare "$chain" "$presets/bass-booster-9v.toml"
grep -q "VD (each stage) .* / " "$tmp/out" || { echo "FAIL: compare shows one stage's VD for a chain"; cat "$tmp/out"; fail=1; }
check "compare --json with a chain" 0 "$bin" compare "$chain" "$presets/bass-booster-9v.toml" --json
python3 -c 'import json,sys; d=json.load(open(sys.argv[1]))["designs"]; assert len(d[0]["stages"]) == 2 and "operating_point" not in d[0] and "operating_point" in d[1] and abs(d[0]["output_dbu"]+10)<0.01' "$tmp/out" || { echo "FAIL: compare --json with a chain"; fail=1; }
check "render of a chain" 0 "$bin" render "$chain" --input "$tmp/tone.wav" --output "$tmp/chain.wav"
grep -q "through a chain of 2 stages" "$tmp/out" && ! grep -q "distorting stage" "$tmp/out" || { echo "FAIL: render of a chain calls it a stage"; cat "$tmp/out"; fail=1; }
check "measure --against a chain" 0 "$bin" measure "$tmp/chain.wav" --against "$chain" --drive 1Vpk
grep -q "predicted output .* at the load" "$tmp/out" && grep -q "not the chain" "$tmp/out" || { echo "FAIL: measure --against a chain"; cat "$tmp/out"; fail=1; }
check "version" 0 "$bin" --version
printf 'rs_ohm,id_a\n100,3.6m\n1k,1.02m\n10k,0.16m\n' > "$tmp/jig.csv"
check "fit" 0 "$bin" fit "$tmp/jig.csv"
grep -q '^\[jfet\]' "$tmp/out" || { echo "FAIL: fit printed no [jfet] block"; fail=1; }
printf 'part,vgs_v,id_a\nA,0,5 mA\nA,-0.5,2.8125m\nA,-1,1.25m\nB,0,4m\nB,-0.5,2.25m\nB,-1,1m\nC,0,5.05m\nC,-0.5,2.857m\nC,-1,1.275m\n' > "$tmp/bag.csv"
check "fit of a bag" 0 "$bin" fit "$tmp/bag.csv" --csv
cp "$tmp/out" "$tmp/parts.csv"
check "match" 0 "$bin" match "$tmp/parts.csv" --json
python3 -c 'import json,sys; j=json.load(open(sys.argv[1])); assert j["sets"][0]["parts"] == ["A", "C"] and j["left_over"] == ["B"]' "$tmp/out" || { echo "FAIL: match"; cat "$tmp/out"; fail=1; }
check "tune over a bag" 0 "$bin" tune "$presets/bass-booster-9v.toml" --target vd=4.5 --over-spread --parts "$tmp/parts.csv"
grep -q "every part once of the 3" "$tmp/out" || { echo "FAIL: tune over a bag"; cat "$tmp/out"; fail=1; }
# A report that standard output cannot take (a full disk, /dev/full, a closed descriptor) is
# exit 1 with a message on stderr, never success with the report cut short.
stdout_fails() { # description, full|closed, command...
  local what=$1 how=$2
  shift 2
  if [ "$how" = full ]; then "$@" >/dev/full 2>"$tmp/err"; else "$@" >&- 2>"$tmp/err"; fi
  local got=$?
  [ "$got" -eq 1 ] || { echo "FAIL: $what, standard output $how: exit $got, expected 1"; fail=1; }
  grep -q "standard output" "$tmp/err" || { echo "FAIL: $what, standard output $how: no message"; cat "$tmp/err"; fail=1; }
}
for how in full closed; do
  stdout_fails "bias" $how "$bin" bias "$presets/bass-booster-9v.toml"
  stdout_fails "spread --csv" $how "$bin" spread "$presets/bass-booster-9v.toml" --runs "$spread_rows" --csv
  stdout_fails "sweep --json" $how "$bin" sweep "$presets/clean-preamp-18v.toml" --steps 3 --json
  stdout_fails "fit" $how "$bin" fit "$tmp/jig.csv"
  stdout_fails "tone" $how "$bin" tone --seconds 0.1 --force "$tmp/tone2.wav"
  stdout_fails "--help" $how "$bin" --help
  stdout_fails "--version" $how "$bin" --version
done
# Devices and endless streams are no text files: refused by name, before anything is read.
cp "$presets/bass-booster-9v.toml" "$tmp/alone.toml"
PINCHOFF_DEVICES=/dev/zero check "PINCHOFF_DEVICES=/dev/zero" 2 "$bin" bias "$tmp/alone.toml" --set jfet.class=general-purpose
grep -q "'/dev/zero' is a device, not a device-class file" "$tmp/err" || { echo "FAIL: PINCHOFF_DEVICES=/dev/zero message"; cat "$tmp/err"; fail=1; }
check "bias /dev/zero" 2 "$bin" bias /dev/zero
grep -q "'/dev/zero' is a device, not a stage file" "$tmp/err" || { echo "FAIL: bias /dev/zero message"; cat "$tmp/err"; fail=1; }
check "bias through a pipe" 0 "$bin" bias <(cat "$presets/bass-booster-9v.toml")
[ $fail -eq 0 ] && echo "end-to-end: all passed"
exit $fail

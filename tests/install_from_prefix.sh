#!/usr/bin/env bash
# An installed copy runs on its own: `cmake --install` into a fresh prefix, then a stage
# naming a device class, in a folder with no devices.toml beside it, analysed from an
# unrelated working folder. The program must find PREFIX/share/pinchoff/devices.toml from
# its own location and hold no path of the source tree.
# Usage: install_from_prefix.sh BUILD_DIR SOURCE_DIR [plain|sanitized]
set -u
build=$1
source_dir=$(cd "$2" && pwd -P)
kind=${3:-plain}
prefix=$(mktemp -d)
stages=$(mktemp -d)
elsewhere=$(mktemp -d)
trap 'rm -rf "$prefix" "$stages" "$elsewhere"' EXIT
fail=0

cmake --install "$build" --prefix "$prefix" >"$elsewhere/install.log" 2>&1 || {
  echo "FAIL: cmake --install"; cat "$elsewhere/install.log"; exit 1; }
rm -f "$elsewhere/install.log"
bin=$prefix/bin/pinchoff
for f in "$bin" "$prefix/share/pinchoff/devices.toml" "$prefix/share/pinchoff/presets/bass-booster-9v.toml"; do
  [ -e "$f" ] || { echo "FAIL: not installed: ${f#"$prefix"/}"; fail=1; }
done

# No source-tree path in what the program holds (debug sections, which it never reads, are
# left out). A sanitizer build names its source files for its reports: not checked there.
if [ "$kind" = sanitized ]; then
  echo "sanitizer build: the check for source-tree paths is left to the plain build"
else
  objcopy --strip-debug "$bin" "$elsewhere/stripped" || { echo "FAIL: objcopy"; exit 1; }
  if strings "$elsewhere/stripped" | grep -F -e "$source_dir" -e "$2"; then
    echo "FAIL: the installed program names the source tree ($source_dir)"; fail=1
  fi
  rm -f "$elsewhere/stripped"
fi

# A 9 V common-source stage of our own naming the general-purpose class (common practice
# values), copied where no devices.toml lies.
cat > "$stages/class-stage.toml" <<'TOML'
name = "class lookup from an installed copy"
[supply]
volts = 9
[jfet]
class = "general-purpose"
[gate]
resistor = "1M"
[drain]
resistor = "2.2k"
[source]
resistor = "1k"
TOML
[ -e "$stages/devices.toml" ] && { echo "FAIL: devices.toml beside the stage"; exit 1; }

cd "$elsewhere" || exit 1
env -u PINCHOFF_DEVICES "$bin" bias "$stages/class-stage.toml" >out.txt 2>err.txt
status=$?
[ "$status" -eq 0 ] || { echo "FAIL: bias exited $status"; cat err.txt; fail=1; }
grep -q "(class general-purpose)" out.txt || { echo "FAIL: the report does not name the class"; cat out.txt; fail=1; }
grep -q "^Operating point" out.txt || { echo "FAIL: no operating point printed"; cat out.txt; fail=1; }
cat out.txt

# The printed point is the class's: the square law (Shichman-Hodges, with channel-length
# modulation; common practice) with the class's typical IDSS, VP and lambda from the
# installed devices.toml, and VS = ID * RS, hold at the reported point.
env -u PINCHOFF_DEVICES "$bin" bias "$stages/class-stage.toml" --json >out.json 2>/dev/null ||
  { echo "FAIL: bias --json"; fail=1; }
python3 - "$prefix/share/pinchoff/devices.toml" out.json <<'PY' || fail=1
import json, sys, tomllib
cls = tomllib.load(open(sys.argv[1], "rb"))["general-purpose"]
idss = float(cls["typical_idss"].rstrip("m")) * 1e-3
vp, lam = float(cls["typical_vp"]), float(cls["lambda"])
j = json.load(open(sys.argv[2]))
op = j["operating_point"] if "operating_point" in j else j
vgs, vds, i_d, vs = op["vgs_v"], op["vds_v"], op["id_a"], op["vs_v"]
law = idss * (1 + lam * vds) * (1 - vgs / vp) ** 2
ok = abs(i_d - law) <= 1e-3 * law and abs(vs - i_d * 1e3) <= 1e-3 * vs and op["region"] == "saturation"
print(f"class point: ID {i_d:.6g} A (square law {law:.6g} A), VGS {vgs:.4g} V, VS {vs:.4g} V")
if not ok:
    print("FAIL: the reported point is not the class's")
    sys.exit(1)
PY
exit $fail

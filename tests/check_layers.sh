#!/usr/bin/env bash
# The folder tree is the architecture: each file includes only its own layer or layers
# below it, and the layers under cli/ never speak of command-line options.
#
#   base < dsp (dsp/io) < model/device < model/circuit < model/engine < model/analysis
#        < model/audio < cli
#
# Usage: check_layers.sh SOURCE_DIR [includes]. Prints every offending line; exit 1 if there
# is one. With "includes", only the include direction is checked.
set -u
root=${1:?usage: check_layers.sh SOURCE_DIR}
cd "$root" || exit 2

rank() {
  case $1 in
    base/*) echo 0 ;;
    dsp/*) echo 1 ;;
    model/device/*) echo 2 ;;
    model/circuit/*) echo 3 ;;
    model/engine/*) echo 4 ;;
    model/analysis/*) echo 5 ;;
    model/audio/*) echo 6 ;;
    cli/*) echo 7 ;;
    *) echo -1 ;;
  esac
}

bad=0
for f in $(find base dsp model cli -name '*.hpp' -o -name '*.cpp' | sort); do
  r=$(rank "$f")
  if [ "$r" -lt 0 ]; then
    echo "$f: a source file outside the layers (base, dsp, model/{device,circuit,engine,analysis,audio}, cli)"
    bad=1
    continue
  fi
  while IFS= read -r line; do
    inc=${line#*\"}
    inc=${inc%%\"*}
    ri=$(rank "$inc")
    if [ "$ri" -lt 0 ]; then
      echo "$f: includes \"$inc\", which is in no layer"
      bad=1
    elif [ "$ri" -gt "$r" ]; then
      echo "$f: includes \"$inc\", a layer above its own"
      bad=1
    fi
  done < <(grep -E '^\s*#\s*include\s*"' "$f")
done

# The model and the layers below it name fields and values, never options: an option
# name ("--oversample") in base/, dsp/ or model/ belongs in cli/.
# (An option is "--word" inside a string or a comment; a decrement is not.)
if [ "${2:-}" != includes ] && grep -rnE --include='*.hpp' --include='*.cpp' -e '("[^"]*|//.*)--[a-z]' base dsp model; then
  echo "^ option names in base/, dsp/ or model/: the model names fields; cli/ maps them to options"
  bad=1
fi

if [ "$bad" -eq 0 ]; then
  if [ "${2:-}" = includes ]; then echo "layers: every include points down"
  else echo "layers: every include points down; no option names below cli/"; fi
fi
exit "$bad"

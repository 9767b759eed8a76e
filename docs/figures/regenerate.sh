#!/usr/bin/env bash
# Regenerate the figures shown in README.md and docs/*.md from the demo
# netlists (run from the repository root).  Look at every one afterwards.
set -euo pipefail
cd "$(dirname "$0")/../.."
out=docs/figures
chain() { python -m chain.cli "$@"; }
chain schematic netlists/lead_four_stage.chain -o $out/lead-schematic.png
chain plot netlists/lead_four_stage.chain -o $out/lead-bode.png --stages --impedance
chain bias netlists/lead_four_stage.chain --plot $out/lead-bias.png >/dev/null
chain headroom netlists/clean_two_stage.chain --plot $out/clean-transfer.png >/dev/null
chain diff netlists/voicings/clean_bright.chain netlists/voicings/clean_dark.chain \
    --plot $out/bright-vs-dark.png >/dev/null || true   # exit 1: they differ
chain compare netlists/lead_four_stage.chain --vary tone.treble=2,5,8 --plot $out/lead-treble.png >/dev/null || true

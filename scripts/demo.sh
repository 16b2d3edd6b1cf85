#!/usr/bin/env bash
# evtkin demo: run the example analyses on the shipped toy samples into demo-output/.
# Used by `make demo` (which sets up .venv first). Toy data: not a physics prediction.
set -euo pipefail
cd "$(dirname "$0")/.."
PY=.venv/bin/python
[ -x "$PY" ] || PY=python3
OUT=demo-output
mkdir -p "$OUT"

run() {  # run CONFIG NAME: skipped with a note when its samples are not there yet
    local config=$1 name=$2
    shift 2
    for f in "$@"; do
        if [ ! -f "$f" ]; then
            echo "demo: skipping $name: missing sample $f (make it with: evtkin toy)" >&2
            return 0
        fi
    done
    echo "== $name: evtkin run $config"
    "$PY" -m evtkin run "$config" --out "$OUT/$name"
}

run configs/ttbar_lepton_jets.toml ttbar_lepton_jets \
    samples/toy_ttbar.lhe.gz samples/toy_ttbar_deformed.lhe.gz
run configs/ttbar_truth.toml ttbar_truth \
    samples/toy_ttbar.lhe.gz samples/toy_ttbar_deformed.lhe.gz
run configs/drell_yan.toml drell_yan samples/toy_drellyan.lhe.gz
run configs/ttbar_reco.toml ttbar_reco samples/toy_ttbar_reco.root
run configs/ttbar_regions.toml ttbar_regions samples/toy_ttbar_reco.root
# tt̄ and Drell–Yan stacked with toy "measured" points (samples/toy_measured_*.csv, invented)
run configs/dilepton_stack.toml dilepton_stack \
    samples/toy_ttbar.lhe.gz samples/toy_drellyan.lhe.gz samples/toy_measured_mll.csv

# Particle level: the lepton+jets analysis on the toy shower sample (the first 250 events of
# toy_ttbar.lhe.gz, showered) with dressed leptons, ghost-b-labelled jets and invisible missing
# pT; its truth_files give particle ↔ parton response matrices for m(tt̄) and the top pT.
run configs/ttbar_particle_level.toml ttbar_particle_level \
    samples/toy_ttbar_shower.hepmc.gz samples/toy_ttbar.lhe.gz
# the parton-level analysis of the same 250 events, for the comparison below
if [ -f "$OUT/ttbar_particle_level/results.json" ]; then
    echo "== parton level, same events: evtkin run configs/ttbar_lepton_jets.toml --max-events 250"
    "$PY" -m evtkin run configs/ttbar_lepton_jets.toml --max-events 250 \
        --out "$OUT/ttbar_parton_level_250"
fi

# Re-draw from results.json without running again: the leading-lepton pT on a linear scale,
# two bins merged (exact for every normalisation), as PNG and SVG, into another folder.
if [ -f "$OUT/dilepton_stack/results.json" ]; then
    echo "== re-drawn: evtkin plot $OUT/dilepton_stack --hists lep_pt mll --rebin 2 --liny"
    "$PY" -m evtkin plot "$OUT/dilepton_stack" --hists lep_pt mll --rebin 2 --liny \
        --formats png svg --out "$OUT/dilepton_stack_redrawn"
fi

# The standard against the deformed top-pair sample: ratios, pulls, χ² tests, HTML report.
# Shapes only (each histogram normalised to unit area): the deformation changes m(tt̄), the top
# pT and the rapidity gap, not the resonance line shapes.
if [ -f "$OUT/ttbar_truth/results.json" ]; then
    echo "== comparison: evtkin compare $OUT/ttbar_truth --shape-only (ttbar vs ttbar_deformed)"
    "$PY" -m evtkin compare "$OUT/ttbar_truth" --shape-only --pulls --out "$OUT/compare_ttbar"
fi

# Particle level against parton level, the same events: m(tt̄), top pT, lepton pT. The two
# levels share their events, so the χ² p-values (made for independent samples) are not
# meaningful here; the ratios show what the shower and the particle-level definitions change.
if [ -f "$OUT/ttbar_parton_level_250/results.json" ]; then
    echo "== comparison: evtkin compare parton level vs particle level (same 250 events)"
    "$PY" -m evtkin compare "$OUT/ttbar_parton_level_250" "$OUT/ttbar_particle_level" \
        --samples ttbar ttbar --hists m_tt top_pt lepton_pt --out "$OUT/compare_particle_parton"
fi

echo
echo "Outputs (toy data, not a physics prediction):"
for d in "$OUT"/*/; do
    [ -f "$d/results.json" ] || continue
    echo "  $d"
    echo "    results.json, histograms.root, csv/, cutflow/, plots/, provenance.json"
    for c in "$d"/cutflow/*.txt; do
        [ -f "$c" ] && sed 's/^/    /' "$c"
    done
done
if [ -f "$OUT/compare_ttbar/summary.txt" ]; then
    echo
    echo "  $OUT/compare_ttbar/ (sorted by p-value, smallest first)"
    sed 's/^/    /' "$OUT/compare_ttbar/summary.txt"
fi
if [ -f "$OUT/ttbar_particle_level/responses.json" ]; then
    echo
    echo "  particle ↔ parton response matrices: $OUT/ttbar_particle_level/responses.json,"
    echo "    plots/response_ttbar_m_tt_coarse.png, plots/response_ttbar_top_pt_coarse.png"
fi
for r in "$OUT"/*/report.html; do
    [ -f "$r" ] && echo "HTML report: $(cd "$(dirname "$r")" && pwd)/report.html"
done

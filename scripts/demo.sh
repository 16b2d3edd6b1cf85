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

# Particle level: the lepton+jets analysis on toy shower events with dressed leptons,
# ghost-b-labelled jets and invisible missing pT; its truth_files give particle ↔ parton
# response matrices for m(tt̄) and the top pT. The shipped shower sample (250 events) is kept
# small, so the demo showers the first $PL_EVENTS events of toy_ttbar.lhe.gz here with a fixed
# seed (about a minute; reused while its seed and event count stay the same) and runs a copy
# of configs/ttbar_particle_level.toml whose files point at it.
PL_EVENTS=2000
PL_SEED=1501
PL_DIR="$OUT/particle_level_input"
PL_SHOWER="$PL_DIR/toy_ttbar_shower_${PL_EVENTS}_seed${PL_SEED}.hepmc.gz"
PL_CONFIG="$PL_DIR/ttbar_particle_level_${PL_EVENTS}.toml"
PL_PARTON="$OUT/ttbar_parton_level_${PL_EVENTS}"
pl_sample_ok() {  # the shower file exists and says it holds PL_EVENTS events of seed PL_SEED
    [ -f "$PL_SHOWER" ] && "$PY" -c '
import sys
from evtkin import hepmc_info
info = hepmc_info(sys.argv[1], count=True)
ok = info.attributes.get("toy_seed") == sys.argv[2] and info.n_events == int(sys.argv[3])
sys.exit(0 if ok else 1)' "$PL_SHOWER" "$PL_SEED" "$PL_EVENTS" 2>/dev/null
}
if [ -f samples/toy_ttbar.lhe.gz ]; then
    mkdir -p "$PL_DIR"
    if pl_sample_ok; then
        echo "== particle level: reusing $PL_SHOWER ($PL_EVENTS events, seed $PL_SEED)"
    else
        echo "== particle level: evtkin toy shower samples/toy_ttbar.lhe.gz -n $PL_EVENTS --seed $PL_SEED"
        "$PY" -m evtkin toy shower samples/toy_ttbar.lhe.gz -n "$PL_EVENTS" --seed "$PL_SEED" \
            -o "$PL_SHOWER"
    fi
    # the config's paths are relative to the config file, which lives in $PL_DIR
    sed -e "s|\"../samples/toy_ttbar_shower.hepmc.gz\"|\"$(basename "$PL_SHOWER")\"|" \
        -e 's|"../samples/toy_ttbar.lhe.gz"|"../../samples/toy_ttbar.lhe.gz"|' \
        -e 's|"../demo-output/ttbar_particle_level"|"../ttbar_particle_level"|' \
        configs/ttbar_particle_level.toml > "$PL_CONFIG.tmp"
    if ! grep -q "$(basename "$PL_SHOWER")" "$PL_CONFIG.tmp" \
        || ! grep -q '"../../samples/toy_ttbar.lhe.gz"' "$PL_CONFIG.tmp"; then
        echo "demo: configs/ttbar_particle_level.toml no longer has the files this script rewrites" >&2
        exit 1
    fi
    mv "$PL_CONFIG.tmp" "$PL_CONFIG"
    run "$PL_CONFIG" ttbar_particle_level "$PL_SHOWER" samples/toy_ttbar.lhe.gz
    # the parton-level analysis of the same events, for the comparison below
    if [ -f "$OUT/ttbar_particle_level/results.json" ]; then
        echo "== parton level, same events: evtkin run configs/ttbar_lepton_jets.toml --max-events $PL_EVENTS"
        "$PY" -m evtkin run configs/ttbar_lepton_jets.toml --max-events "$PL_EVENTS" \
            --out "$PL_PARTON"
    fi
else
    echo "demo: skipping ttbar_particle_level: missing sample samples/toy_ttbar.lhe.gz" >&2
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
if [ -f "$PL_PARTON/results.json" ]; then
    echo "== comparison: evtkin compare parton level vs particle level (same $PL_EVENTS events)"
    "$PY" -m evtkin compare "$PL_PARTON" "$OUT/ttbar_particle_level" \
        --samples ttbar ttbar --hists m_tt top_pt_wide lepton_pt --out "$OUT/compare_particle_parton"
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
if [ -f "$OUT/ttbar_particle_level/results.json" ]; then
    echo
    "$PY" -c '
import json, sys
def counts(folder):
    flow = json.load(open(folder + "/results.json"))["samples"]["ttbar"]["cutflow"]
    return flow[0]["n_raw"], flow[-1]["n_raw"], flow[-1]["step"]
n_all, n_sel, step = counts(sys.argv[1])
print(f"  particle level: {n_all} toy shower events generated (seed {sys.argv[3]}, {sys.argv[4]}),")
print(f"    {n_sel} selected (passing \"{step}\")", end="")
try:
    p_all, p_sel, _ = counts(sys.argv[2])
    print(f"; parton level, the same {p_all} events: {p_sel} selected")
except OSError:
    print()' "$OUT/ttbar_particle_level" "$PL_PARTON" "$PL_SEED" "$PL_SHOWER"
fi
if [ -f "$OUT/ttbar_particle_level/responses.json" ]; then
    echo "  particle ↔ parton response matrices: $OUT/ttbar_particle_level/responses.json,"
    echo "    plots/response_ttbar_m_tt_coarse.png, plots/response_ttbar_top_pt_coarse.png"
fi
for r in "$OUT"/*/report.html; do
    [ -f "$r" ] && echo "HTML report: $(cd "$(dirname "$r")" && pwd)/report.html"
done

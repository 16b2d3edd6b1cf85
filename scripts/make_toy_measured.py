"""Make the toy "measured" tables of the demo (samples/toy_measured_*.csv) from a results folder.

Toy data, invented for the demo: the stacked prediction of every sample in expected events,
times a gentle tilt (1 + 0.05 x, x running from -1 to 1 across the histogram), Poisson-fluctuated
with a fixed seed; statistical error sqrt(n), a 3 % systematic error. Not a measurement.

    python scripts/make_toy_measured.py demo-output/dilepton_stack samples mll lep_pt
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

from evtkin.output.measured import MeasuredTable, write_measured_csv
from evtkin.output.tables import read_results


def main(folder: str, out: str, *hists: str) -> None:
    res = read_results(folder)
    rng = np.random.default_rng(19)
    for name in hists:
        hs = [s.histograms[name] for s in res.samples.values() if name in s.histograms]
        if any(h.normalisation != "events" for h in hs):
            raise SystemExit(f"{name}: the toy tables are made from expected events")
        pred = np.sum([h.inner_values() for h in hs], axis=0)
        x = np.linspace(-1.0, 1.0, pred.size)
        n = rng.poisson(np.maximum(pred * (1.0 + 0.05 * x), 0.0)).astype(float)
        axis = hs[0].axes[0]
        table = MeasuredTable(edges=np.asarray(axis.edges), values=n, stat=np.sqrt(n),
                              syst=0.03 * n, label="toy measured points", x_unit=axis.unit,
                              y_unit="events", toy=True)
        path = Path(out) / f"toy_measured_{name}.csv"
        write_measured_csv(path, table, header="evtkin toy measured table: invented for the "
                           "demo (seeded Poisson fluctuation of the toy prediction), NOT data")
        print(path)


if __name__ == "__main__":
    main(*sys.argv[1:])

"""``[composites.NAME]``: the build and its validated options."""

from __future__ import annotations

from typing import Any

from evtkin.config.schema import (
    COMPOSITE_BUILDS,
    DEFAULT_TOP_MASS,
    DEFAULT_W_MASS,
    CompositeSpec,
)
from evtkin.config.tables import _pair, _Table


def _read_composites(top: _Table) -> dict[str, CompositeSpec]:
    t = top.table("composites")
    out: dict[str, CompositeSpec] = {}
    if t is None:
        return out
    for name in list(t.data):
        c = t.table(name)
        assert c is not None
        build = c.string("build", choices=COMPOSITE_BUILDS)
        opts: dict[str, Any] = {}
        if build == "pair":
            of = c.strings("of")
            if len(of) not in (1, 2):
                raise c.ctx.error((*c.path, "of"), "expected one collection or two collections")
            inputs = tuple(of)
            opts["mass_window"] = _pair(c, "mass_window")
            opts["min_dr"] = c.number("min_dr", None, nonnegative=True)
            opts["max_dr"] = c.number("max_dr", None, positive=True)
            opts["opposite_charge"] = c.boolean("opposite_charge", False)
            opts["same_flavour"] = c.boolean("same_flavour", False)
            opts["best_mass"] = c.number("best_mass", None, positive=True)
        elif build == "leptonic_w":
            inputs = (c.string("lepton"), c.string("missing_pt"))
            opts["w_mass"] = c.number("w_mass", DEFAULT_W_MASS, positive=True)
            opts["root"] = c.string("root", "smaller_abs_pz",
                                    choices=("smaller_abs_pz", "larger_abs_pz", "both"))
        else:  # ttbar_lepton_jets
            inputs = (c.string("lepton"), c.string("jets"), c.string("missing_pt"))
            opts["use_b_tags"] = c.boolean("use_b_tags", False)
            opts["neutrino_root"] = c.string("neutrino_root", "both",
                                             choices=("smaller_abs_pz", "larger_abs_pz", "both"))
            opts["w_mass"] = c.number("w_mass", DEFAULT_W_MASS, positive=True)
            opts["top_mass"] = c.number("top_mass", DEFAULT_TOP_MASS, positive=True)
            # resolutions entering the χ² (GeV); plain defaults, tune for detector-level input
            opts["w_resolution"] = c.number("w_resolution", 10.0, positive=True)
            opts["top_resolution"] = c.number("top_resolution", 15.0, positive=True)
            opts["max_jets"] = c.integer("max_jets", 6, positive=True)
        c.done()
        out[name] = CompositeSpec(name, build, inputs, opts)
    t.done()
    return out

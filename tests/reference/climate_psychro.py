"""Reference values for potclim's psychrometrics (src/climate/psychro.rs) from
two general-purpose libraries: PsychroLib (ASHRAE 2017 Handbook Fundamentals,
ch. 1, Hyland-Wexler saturation pressure over liquid water above 0.01 C, and
its Newton inversion for the dew point) and MetPy (Ambaum 2020 saturation
pressure; dew point by inverting Bolton 1980).

potclim uses FAO-56 eq. 11 and its exact inversion; the Rust test
`tests/climate_reference.rs` compares against these fixtures with tolerances
that state the expected formula difference (see that file).

Regenerate (from the repository root):
    python3 -m venv .venv && .venv/bin/pip install numpy psychrolib metpy
    .venv/bin/python tests/reference/climate_psychro.py
which rewrites tests/reference/fixtures/climate_psychro.json.
"""
import json
import os
from importlib.metadata import version

import metpy.calc as mpcalc
import numpy as np
import psychrolib as pl
from metpy.units import units

pl.SetUnitSystem(pl.SI)

rows = []
for t in np.arange(5.0, 40.01, 2.5):
    for rh in [20.0, 40.0, 60.0, 80.0, 95.0]:
        es_pl = pl.GetSatVapPres(float(t)) / 1000.0  # kPa
        td_pl = pl.GetTDewPointFromRelHum(float(t), rh / 100.0)
        es_mp = mpcalc.saturation_vapor_pressure(t * units.degC).to("kPa").m
        ea_mp = es_mp * rh / 100.0
        td_mp = mpcalc.dewpoint(ea_mp * units.kPa).to("degC").m
        rows.append({
            "t_c": float(t),
            "rh_pct": rh,
            "es_kpa_psychrolib": float(es_pl),
            "vpd_kpa_psychrolib": float(es_pl * (1 - rh / 100.0)),
            "td_c_psychrolib": float(td_pl),
            "es_kpa_metpy": float(es_mp),
            "vpd_kpa_metpy": float(es_mp * (1 - rh / 100.0)),
            "td_c_metpy": float(td_mp),
        })

out = {
    "source": "PsychroLib %s (GetSatVapPres, GetTDewPointFromRelHum) and MetPy %s "
              "(saturation_vapor_pressure, dewpoint)" % (version("PsychroLib"), version("metpy")),
    "rows": rows,
}
path = os.path.join(os.path.dirname(__file__), "fixtures", "climate_psychro.json")
with open(path, "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print("wrote", path, len(rows), "rows")

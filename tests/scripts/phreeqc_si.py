"""PHREEQC's calcite and gypsum saturation indices for a list of water analyses.

Reads JSON from stdin: a list of objects with na, k, ca, mg, cl, so4, alk (mg/L; sulfate as SO4,
alkalinity as HCO3), ph and temp (C). Writes JSON to stdout: a list of [calcite SI, gypsum SI,
ionic strength]. Uses phreeqpython (PyPI) with its copy of PHREEQC's phreeqc.dat database.
Called by tests/tests/acceptance/scaling_refs.rs.
"""
import json
import sys

from phreeqpython import PhreeqPython

pp = PhreeqPython(database="phreeqc.dat")
out = []
for w in json.load(sys.stdin):
    s = pp.add_solution({
        "units": "mg/l",
        "temp": w["temp"],
        "pH": w["ph"],
        "Na": w["na"],
        "K": w["k"],
        "Ca": w["ca"],
        "Mg": w["mg"],
        "Cl": w["cl"],
        "S(6)": w["so4"],  # phreeqc.dat reads S(6) in mg/L as SO4
        "Alkalinity": "%r as HCO3" % w["alk"],
    })
    out.append([s.si("Calcite"), s.si("Gypsum"), s.I])
    s.forget()
json.dump(out, sys.stdout)

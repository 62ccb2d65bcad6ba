import numpy as np, time
from simulator.scenario.loader import load_scenario
from simulator.analysis.joint_feasibility import *
from simulator.analysis.feasibility import occupation_bound, fisher_matrix
sc = load_scenario("scenarios/drum_two_probes.toml")
t=time.time()
b = tone_set_bounds(sc, [("red_probe",), ("blue_probe",), ("red_probe","blue_probe"), ("drive",), ("drive","red_probe","blue_probe")])
print(time.time()-t)
print("\n".join(tone_set_text(b)))
for x in b: print(x.tones, x.information_per_second)
print(occupation_bound(sc))
ob = occupation_bound(sc.replace("detection.tone","red_probe")); print(ob.error_one_second, ob.fisher_per_second[0,0])

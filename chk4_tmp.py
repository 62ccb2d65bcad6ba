import numpy as np
from simulator.scenario.loader import load_scenario
from simulator.model.system import System
from simulator.model.joint_detection import *
sc = load_scenario("scenarios/drum_two_probes.toml")
s = System(sc)
j = joint_detection_chain(sc, s.point, s.model, ["red_probe", "blue_probe"])
np.set_printoptions(precision=4, linewidth=150)
for f in [-5.99996e6, 5.99996e6, -5.6e6, 5.6e6, 4e6]:
    S = joint_spectral_matrix(j, [f], 60e6)[0]
    print(f, np.abs(S))

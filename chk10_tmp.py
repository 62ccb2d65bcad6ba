from simulator.scenario.loader import load_scenario
from simulator.model.system import System
from simulator.linear.tone_gap import *
from simulator.linear.steady_state import steady_state
for t in ["blue_probe", "red_probe", "drive"]:
    sc = load_scenario("scenarios/drum_two_probes.toml").replace("detection.tone", t)
    s = System(sc)
    g = tone_occupation_gaps(s)
    print(t, g[0].text())
    a = System(detected_alone(s))
    print("  n all", steady_state(s).modes[0].occupation, "alone", steady_state(a).modes[0].occupation,
          "width", steady_state(s).modes[0].effective_linewidth_hz, steady_state(a).modes[0].effective_linewidth_hz)

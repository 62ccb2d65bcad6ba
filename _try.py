import sys
sys.path.insert(0, "tests")
from tone_scenarios import CARRIER_HZ, OMEGA_HZ, scenario_text, tone_table
from simulator.scenario.loader import parse_scenario
from simulator.model.system import System
from simulator.linear.steady_state import steady_state
PHOTONS=1e4
upper = tone_table("upper", PHOTONS, OMEGA_HZ, frequency_hz=CARRIER_HZ + 2 * OMEGA_HZ)
text = scenario_text(drive_photons=PHOTONS, bath_occupation=0.0, linewidth_hz=10.0, extra=upper)
text = text.replace('[[tones]]', '[detection]\nbackaction_evading = true\n[[tones]]')
sc = parse_scenario(text)
s = System(sc)
print(s, s.model.states, s.model.inputs)
st = steady_state(s)
print(st.modes)
print(s.detected.point.drive_frequency_hz, s.detected.point.modes)

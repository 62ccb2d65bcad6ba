import sys, time
sys.path.insert(0, "tests")
exec(open("_try.py").read().split("s = System")[0])
from simulator.workflows.inspection import inspect_scenario
print(inspect_scenario(sc).to_text())
open("_bae.toml","w").write(sc.to_toml())

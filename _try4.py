import sys, time
sys.path.insert(0, "tests")
exec(open("_try.py").read().split("s = System")[0])
from simulator.model.system import System
from simulator.analysis.bae_feasibility import resolution_comparison
t=time.time()
s = System(sc)
for r in resolution_comparison(s): print(r)
print(time.time()-t)

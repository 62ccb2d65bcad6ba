import sys
sys.path.insert(0, "tests")
import numpy as np
exec(open("_try.py").read().split("s = System")[0])
from simulator.model.system import System
from simulator.linear.quadratures import quadrature_budget, imprecision_closed_form
from simulator.linear.spectra import homodyne_spectrum, state_spectrum
from simulator.model.backaction_evasion import pair_parameters
s = System(sc)
qb = quadrature_budget(s)
print("\n".join(qb.text()))
f = np.array([0.0, 1.0, 5.0, 1e3, 5e4])
h = homodyne_spectrum(s, f, quadrature_angle=np.pi/2, efficiency=1.0)
x1 = state_spectrum(s.model, f, ["drum.X1"])[:, 0, 0].real
p = pair_parameters(sc, s.point)
kap, kex = p.kappa, p.kappa_ex
c = p.g_minus+p.g_plus
w = 2*np.pi*f
trans = 2*kex*c**2/(kap**2/4+w**2)  # detected = 1 + trans*S_X1 (η=1, homodyne factor 2)
print((h.total - 1)/trans, x1)
print(imprecision_closed_form(p, f), 1/trans)
print(h.contributions.keys())

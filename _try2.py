import sys
sys.path.insert(0, "tests")
import numpy as np
from test_backaction_evasion import two_tones, exact_quadratures
from simulator.model.backaction_evasion import backaction_evading_model
for up in (1e4, 2.5e3):
  for k in (400e3, 200e3, 100e3):
    sc = two_tones(k, upper_photons=up)
    x1, x2 = exact_quadratures(sc)
    a = backaction_evading_model(sc, counter_rotating=False).covariance()
    b = backaction_evading_model(sc).covariance()
    small = (k/(4*5e6))**2
    print(up, k, small, "exact", x1, x2, "rwa err", (a[2,2]-x1)/(x1), (a[3,3]-x2)/x2, "cr err", (b[2,2]-x1)/x1, (b[3,3]-x2)/x2)

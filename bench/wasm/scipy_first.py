"""scipy.optimize.linear_sum_assignment's first call in this process on DIR/cost.f64
(N x N), timed with time.perf_counter around the call alone. Prints {"ms", "cost"}."""
import json
import os
import sys
import time

import numpy as np
from scipy.optimize import linear_sum_assignment

d, n = sys.argv[1], int(sys.argv[2])
a = np.fromfile(os.path.join(d, "cost.f64"), dtype="<f8").reshape(n, n)
t0 = time.perf_counter()
r, c = linear_sum_assignment(a)
ms = (time.perf_counter() - t0) * 1000
print(json.dumps({"ms": ms, "cost": float(a[r, c].sum())}))

#!/usr/bin/python3
"""The forward pass of a ReLU MLP as a chain of numpy matmuls (OpenBLAS via Debian's python3-numpy),
float64 like plumbline's, on one thread. Prints one JSON line per shape and batch: GFLOP/s.
Run by bench/batch.ts as: OPENBLAS_NUM_THREADS=1 /usr/bin/python3 bench/numpy-forward.py SHAPE... BATCH...
(each SHAPE as 10-64-64-5; OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE are unset for this command only)."""
import json
import sys
import time

import numpy as np

shapes = [[int(v) for v in a.split('-')] for a in sys.argv[1:] if '-' in a]
batches = [int(a) for a in sys.argv[1:] if '-' not in a]
rng = np.random.default_rng(1)
for shape in shapes:
    ws = [rng.standard_normal((a, b)) for a, b in zip(shape[:-1], shape[1:])]
    bs = [rng.standard_normal(b) for b in shape[1:]]
    for batch in batches:
        x = rng.standard_normal((batch, shape[0]))
        flops = 2 * batch * sum(a * b for a, b in zip(shape[:-1], shape[1:]))

        def run():
            h = x
            for i, (w, b) in enumerate(zip(ws, bs)):
                h = h @ w + b
                if i < len(ws) - 1:
                    np.maximum(h, 0, out=h)
            return h

        for _ in range(3):
            run()
        n, t = 0, time.perf_counter()
        while time.perf_counter() - t < 1.0:
            run()
            n += 1
        dt = (time.perf_counter() - t) / n
        print(json.dumps({'shape': '-'.join(map(str, shape)), 'batch': batch, 'gflops': flops / dt / 1e9, 'blas': 'numpy ' + np.__version__}))

#!/usr/bin/env python3
"""Adds SciPy's damped eigenvalues to tests/fixtures/scipy_rotor_eig.json.

The fixture's M, K(Ω) and C(Ω) + ΩG of a small spinning rotor are written by
`cargo test --test rotor_scipy -- --ignored`. This script solves the generalized eigenproblem
A z = λ B z with A = [[0, I], [-K, -C]], B = [[I, 0], [0, M]] by scipy.linalg.eig (LAPACK ggev),
keeps the roots with positive imaginary part above 0.05 Hz, sorted by it, and writes the lowest
eight as [re, im] pairs.

Run: python3 scripts/make_rotor_scipy_fixture.py   (needs numpy and scipy)
"""
import json
import pathlib

import numpy as np
import scipy
from scipy import linalg

path = pathlib.Path(__file__).resolve().parent.parent / "tests/fixtures/scipy_rotor_eig.json"
d = json.loads(path.read_text())
m, k, c = (np.array(d[x]) for x in ("m", "k", "c"))
n = m.shape[0]
a = np.block([[np.zeros((n, n)), np.eye(n)], [-k, -c]])
b = np.block([[np.eye(n), np.zeros((n, n))], [np.zeros((n, n)), m]])
lam = linalg.eig(a, b, right=False)
lam = lam[np.isfinite(lam)]
lam = lam[lam.imag > 2 * np.pi * 0.05]
lam = lam[np.argsort(lam.imag)][:8]
d["eigenvalues"] = [[float(z.real), float(z.imag)] for z in lam]
d["scipy_version"] = scipy.__version__
path.write_text(json.dumps(d))
print("\n".join(f"{z.real:.6f} {z.imag:+.6f}i  ({z.imag / 2 / np.pi:.3f} Hz)" for z in lam))

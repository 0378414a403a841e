#!/usr/bin/env python3
"""Writes tests/fixtures/scipy_eig_3dof.json: poles of a 3-DOF system with non-proportional
damping, from scipy.linalg.eig of the first-order state matrix [[0, I], [-M^-1 K, -M^-1 C]].

Run: python3 scripts/make_eig_fixture.py   (needs numpy and scipy)
"""
import json
import pathlib

import numpy as np
import scipy
import scipy.linalg as sl

M = np.diag([1.2, 0.9, 1.5])
K = np.array([[5.0e6, -2.0e6, 0.0], [-2.0e6, 4.5e6, -1.5e6], [0.0, -1.5e6, 2.5e6]])
# Dashpots between masses and to ground: not proportional to M or K.
C = np.array([[30.0, -10.0, 0.0], [-10.0, 18.0, -4.0], [0.0, -4.0, 60.0]])
n = 3
A = np.block([[np.zeros((n, n)), np.eye(n)], [-np.linalg.solve(M, K), -np.linalg.solve(M, C)]])
lam = sl.eigvals(A)
lam = sorted([l for l in lam if l.imag > 0], key=lambda l: l.imag)
out = {
    "source": "scipy.linalg.eigvals of the state matrix [[0, I], [-M^-1 K, -M^-1 C]]",
    "scipy_version": scipy.__version__,
    "m": M.tolist(), "c": C.tolist(), "k": K.tolist(),
    "poles_re": [l.real for l in lam], "poles_im": [l.imag for l in lam],
}
path = pathlib.Path(__file__).resolve().parent.parent / "tests" / "fixtures" / "scipy_eig_3dof.json"
path.write_text(json.dumps(out, indent=1))
print(f"wrote {path}: poles {[complex(l) for l in lam]}")

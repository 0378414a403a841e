#!/usr/bin/env python3
"""Writes tests/fixtures/scipy_frf.json: windowed two-channel records and SciPy's H1, H2 and
coherence for them, as an independent reference for tapgrid's FRF engine.

SciPy's scipy.signal.csd / welch / coherence with a boxcar window, nperseg = record length,
noverlap = 0 and detrend=False average conj(X)·Y over the records laid end to end — the same
estimator as averaging hits (Bendat & Piersol 2010). One-sided scaling factors cancel in the ratios.

Run: python3 scripts/make_scipy_fixtures.py   (needs numpy and scipy)
"""
import json
import pathlib

import numpy as np
import scipy
from scipy import signal

rng = np.random.default_rng(20261202)
fs = 4096.0
n = 512
hits = 5
# A lightly damped two-mode "structure" as a digital filter, driven by decaying random bursts
# (so each record is windowed-looking), plus independent response noise.
b1, a1 = signal.iirpeak(300.0, 30.0, fs=fs)
b2, a2 = signal.iirpeak(900.0, 45.0, fs=fs)
t = np.arange(n) / fs
env = np.exp(-t / 0.04)
recs_a, recs_b = [], []
for _ in range(hits):
    x = rng.standard_normal(n) * env
    y = signal.lfilter(b1, a1, x) - 0.5 * signal.lfilter(b2, a2, x)
    y = y + 0.05 * rng.standard_normal(n)
    recs_a.append(x)
    recs_b.append(y)
xa = np.concatenate(recs_a)
xb = np.concatenate(recs_b)
kw = dict(fs=fs, window="boxcar", nperseg=n, noverlap=0, detrend=False)
_, paa = signal.welch(xa, **kw)
_, pbb = signal.welch(xb, **kw)
f, pab = signal.csd(xa, xb, **kw)  # conj(A)·B
_, pba = signal.csd(xb, xa, **kw)
_, coh = signal.coherence(xa, xb, **kw)
h1 = pab / paa
h2 = pbb / pba
out = {
    "source": "scipy.signal.welch/csd/coherence, boxcar window, nperseg=n, noverlap=0, detrend=False",
    "scipy_version": scipy.__version__,
    "numpy_version": np.__version__,
    "fs": fs,
    "n": n,
    "a": [list(map(float, r)) for r in recs_a],
    "b": [list(map(float, r)) for r in recs_b],
    "frequency_hz": list(map(float, f)),
    "h1_re": list(map(float, h1.real)),
    "h1_im": list(map(float, h1.imag)),
    "h2_re": list(map(float, h2.real)),
    "h2_im": list(map(float, h2.imag)),
    "coherence": list(map(float, coh)),
}
path = pathlib.Path(__file__).resolve().parent.parent / "tests" / "fixtures" / "scipy_frf.json"
path.write_text(json.dumps(out))
print(f"wrote {path} (SciPy {scipy.__version__})")

"""Straightforward NumPy implementations of cg-sense, xf-sparse (FISTA) and low-rank-sparse,
timed per iteration on one slice, as the side-by-side reference of `cargo bench --bench recon`.

Usage: python3 benches/reference/recon_ref.py {numpy|scipy|scipy-ky} COILS FRAMES ROWS COLS ITERATIONS
Prints one JSON object: seconds per iteration of each method and of the FFTs alone.
The FFT convention is the tool's: fftshift(fft2(ifftshift(x), norm="ortho")).
`scipy-ky` is the same algorithms with the trick the Rust operator uses: the readout is fully
sampled, so the normal operator needs 1-D transforms along ky only (the data then live in
(x, ky) hybrid space), to show how much of the gap is that trick and how much the rest.
"""
import json
import sys
import time

import numpy as np

backend, nc, nf, ny, nx, iters = sys.argv[1], *map(int, sys.argv[2:7])
if backend == "scipy":
    import scipy.fft as sfft

    def fft2(x):
        return sfft.fftshift(sfft.fft2(sfft.ifftshift(x, axes=(-2, -1)), norm="ortho", workers=-1), axes=(-2, -1))

    def ifft2(x):
        return sfft.fftshift(sfft.ifft2(sfft.ifftshift(x, axes=(-2, -1)), norm="ortho", workers=-1), axes=(-2, -1))

    def fft_t(x, inverse=False):
        f = sfft.ifft if inverse else sfft.fft
        return f(x, axis=0, norm="ortho", workers=-1)
elif backend == "scipy-ky":
    import scipy.fft as sfft

    def fft2(x):
        return sfft.fftshift(sfft.fft(sfft.ifftshift(x, axes=-2), axis=-2, norm="ortho", workers=-1), axes=-2)

    def ifft2(x):
        return sfft.fftshift(sfft.ifft(sfft.ifftshift(x, axes=-2), axis=-2, norm="ortho", workers=-1), axes=-2)

    def fft_t(x, inverse=False):
        f = sfft.ifft if inverse else sfft.fft
        return f(x, axis=0, norm="ortho", workers=-1)
else:
    def fft2(x):
        return np.fft.fftshift(np.fft.fft2(np.fft.ifftshift(x, axes=(-2, -1)), norm="ortho"), axes=(-2, -1))

    def ifft2(x):
        return np.fft.fftshift(np.fft.ifft2(np.fft.ifftshift(x, axes=(-2, -1)), norm="ortho"), axes=(-2, -1))

    def fft_t(x, inverse=False):
        f = np.fft.ifft if inverse else np.fft.fft
        return f(x, axis=0, norm="ortho")

rng = np.random.default_rng(1)
sens = (rng.standard_normal((nc, 1, ny, nx)) + 1j * rng.standard_normal((nc, 1, ny, nx))).astype(np.complex64)
sens /= np.sqrt((np.abs(sens) ** 2).sum(axis=0, keepdims=True))
mask = (rng.uniform(size=(1, nf, ny, 1)) < 0.25)
y = (rng.standard_normal((nc, nf, ny, nx)) + 1j * rng.standard_normal((nc, nf, ny, nx))).astype(np.complex64) * mask


def forward(x):
    return fft2(sens * x[None]) * mask


def adjoint(k):
    return (np.conj(sens) * ifft2(k * mask)).sum(axis=0)


def normal(x):
    return adjoint(forward(x))


def soft(z, t):
    m = np.abs(z)
    return z * np.maximum(m - t, 0) / np.maximum(m, 1e-30)


def cg_sense():
    b = adjoint(y)
    x = np.zeros_like(b)
    r = b.copy()
    d = r.copy()
    rs = (np.abs(r) ** 2).sum(axis=(1, 2))
    for _ in range(iters):
        q = normal(d) + 0.05 * d
        alpha = rs / np.real((np.conj(d) * q).sum(axis=(1, 2)))
        x += alpha[:, None, None] * d
        r -= alpha[:, None, None] * q
        rs_new = (np.abs(r) ** 2).sum(axis=(1, 2))
        d = r + (rs_new / rs)[:, None, None] * d
        rs = rs_new
    return x


def xf_sparse():
    b = adjoint(y)
    lam = 0.005 * np.abs(fft_t(b)).max()
    x = b.copy()
    z = b.copy()
    t = 1.0
    for _ in range(iters):
        v = z - (normal(z) - b)
        xn = fft_t(soft(fft_t(v), lam), inverse=True)
        tn = 0.5 * (1 + np.sqrt(1 + 4 * t * t))
        z = xn + ((t - 1) / tn) * (xn - x)
        x, t = xn, tn
    return x


def low_rank_sparse():
    b = adjoint(y)
    lam_s = 0.005 * np.abs(fft_t(b)).max()
    m = b.copy()
    l_prev = b.copy()
    s = np.zeros_like(b)
    for _ in range(iters):
        u, sv, vh = np.linalg.svd((m - s).reshape(nf, -1).T, full_matrices=False)
        sv = np.maximum(sv - 0.02 * sv[0], 0)
        l = ((u * sv) @ vh).T.reshape(nf, ny, nx)
        s = fft_t(soft(fft_t(m - l_prev), lam_s), inverse=True)
        ls = l + s
        m = ls - (normal(ls) - b)
        l_prev = l
    return l + s


def per_iteration(f):
    f()  # warm-up
    t0 = time.perf_counter()
    f()
    return (time.perf_counter() - t0) / iters


planes = y.copy()
t0 = time.perf_counter()
for _ in range(5):
    ifft2(fft2(planes))
fft_pair = (time.perf_counter() - t0) / 5
print(json.dumps({
    "backend": backend,
    "numpy": np.__version__,
    "cg_sense_s": per_iteration(cg_sense),
    "xf_sparse_s": per_iteration(xf_sparse),
    "low_rank_sparse_s": per_iteration(low_rank_sparse),
    "fft_pair_s": fft_pair,
}))

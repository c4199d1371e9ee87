"""GPA + PCA in numpy: the comparison for bench_gpa_pca.c.

The same algorithm as fit/procrustes.c and fit/pca.c, written the way a
numpy user would (vectorised over shapes): centre, scale to unit norm, rotate
every shape onto the mean (2-D closed form), tangent-space projection, new
mean rotated onto the first shape and normalised, until the mean moves less
than 1e-10; then the covariance of the aligned shapes and numpy.linalg.eigh;
keep the modes explaining 98% of the variance.

usage: bench_gpa_pca_numpy.py SHAPES.f64 [RUNS]
Reads the raw doubles bench_gpa_pca wrote, prints the median wall and CPU
(process) time and the BLAS numpy runs on, and checks its eigenvalues against the C program's
(SHAPES.f64.eig) so both are known to have done the same sums.
"""
import sys
import time

import numpy as np

N_SHAPES, N_POINTS = 500, 256


def gpa(x, tol=1e-10, max_iter=100):
    """x: (m, n, 2). Returns aligned (m, 2n) in the tangent space and mean."""
    z = x - x.mean(axis=1, keepdims=True)
    z /= np.sqrt((z ** 2).sum(axis=(1, 2)))[:, None, None]
    ref = z[0].copy()
    mean = ref.copy()

    def rotate_onto(s, target):
        # s: (m, n, 2) or (n, 2); angle = atan2(sum s x t, sum s . t)
        a = (s * target).sum(axis=(-2, -1))
        b = (s[..., 0] * target[..., 1] - s[..., 1] * target[..., 0]).sum(axis=-1)
        r = np.hypot(a, b)
        c, sn = (a / r)[..., None], (b / r)[..., None]
        out = np.stack([c * s[..., 0] - sn * s[..., 1],
                        sn * s[..., 0] + c * s[..., 1]], axis=-1)
        return out, r

    for _ in range(max_iter):
        z, cosine = rotate_onto(z, mean)
        acc = (z / cosine[:, None, None]).mean(axis=0)
        acc, _ = rotate_onto(acc, ref)
        new = acc / np.sqrt((acc ** 2).sum())
        change = np.sqrt(((new - mean) ** 2).sum())
        mean = new
        if change < tol:
            break
    z, cosine = rotate_onto(z, mean)
    z /= cosine[:, None, None]
    return z.reshape(len(z), -1), mean.reshape(-1)


def build(x):
    aligned, _ = gpa(x)
    centred = aligned - aligned.mean(axis=0)
    cov = centred.T @ centred / (len(aligned) - 1)
    lam, vec = np.linalg.eigh(cov)
    lam, vec = lam[::-1], vec[:, ::-1]
    k = int(np.searchsorted(np.cumsum(lam) / lam.sum(), 0.98) + 1)
    return lam, vec[:, :k]


def main():
    path = sys.argv[1]
    runs = int(sys.argv[2]) if len(sys.argv) > 2 else 15
    x = np.fromfile(path, dtype="<f8").reshape(N_SHAPES, N_POINTS, 2)
    try:
        from threadpoolctl import threadpool_info, threadpool_limits
        threadpool_limits(1)
        blas = "; ".join(f"{i.get('internal_api')} {i.get('version')} "
                         f"{i.get('architecture')} threads={i.get('num_threads')}"
                         for i in threadpool_info())
    except ImportError:
        blas = "threadpoolctl not installed"
    lam, _ = build(x)  # warm-up
    times, cpu = [], []
    for _ in range(runs):
        t0, c0 = time.perf_counter(), time.process_time()
        lam, vec = build(x)
        cpu.append((time.process_time() - c0) * 1e3)
        times.append((time.perf_counter() - t0) * 1e3)
    times.sort()
    cpu.sort()
    median = float(np.median(times))
    median_cpu = float(np.median(cpu))
    print(f"numpy {np.__version__}: same computation (GPA loop + covariance "
          f"eigh), 1 BLAS thread")
    print(f"  BLAS: {blas}")
    print(f"  {vec.shape[1]} modes kept")
    print(f"  wall: median {median:.2f} ms over {runs} runs (min {times[0]:.2f}, "
          f"max {times[-1]:.2f})")
    print(f"  CPU:  median {median_cpu:.2f} ms (min {cpu[0]:.2f}, max {cpu[-1]:.2f})")
    # Both sides must have computed the same thing: compare the eigenvalues
    # that carry 99.99% of the variance.
    c_eig = np.loadtxt(path + ".eig")
    big = lam[:len(c_eig)] > 1e-4 * lam[0]
    rel = np.max(np.abs(lam[:len(c_eig)][big] - c_eig[big]) / lam[0])
    print(f"  eigenvalues vs C: max difference {rel:.2e} of the largest")
    if not rel < 1e-8:
        print("bench_gpa_pca_numpy: C and numpy eigenvalues differ", file=sys.stderr)
        sys.exit(1)
    print(f"numpy_median_ms={median:.3f}")
    print(f"numpy_median_cpu_ms={median_cpu:.3f}")


if __name__ == "__main__":
    main()

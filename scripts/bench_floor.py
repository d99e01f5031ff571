"""Floors for make bench: the two resources learn cannot go below.

  bench_floor.py read FILE   GDAL reading every block of FILE (all bands) with
                             GTIFF_DIRECT_IO, the way a tiled reader must.
  bench_floor.py syrk P N    OpenBLAS dsyrk (through numpy) forming the P x P
                             cross-product of N float64 pixels, in chunks of
                             2^18 pixels, timing only the products.
  bench_floor.py kernel      which BLAS numpy loaded and which CPU kernel it runs.

Each prints one line: seconds, then a description.
"""
import sys
import time


def read(path):
    from osgeo import gdal
    gdal.UseExceptions()
    gdal.SetConfigOption("GTIFF_DIRECT_IO", "YES")
    ds = gdal.Open(path)
    bw, bh = ds.GetRasterBand(1).GetBlockSize()
    w, h, p = ds.RasterXSize, ds.RasterYSize, ds.RasterCount
    t = time.perf_counter()
    nbytes = 0
    for y in range(0, h, bh):
        for x in range(0, w, bw):
            nbytes += len(ds.ReadRaster(x, y, min(bw, w - x), min(bh, h - y)))
    dt = time.perf_counter() - t
    print("%.3f read %d bands x %d x %d in %d x %d blocks, %.0f MiB, %.2f GiB/s"
          % (dt, p, w, h, bw, bh, nbytes / 2**20, nbytes / dt / 2**30))


def syrk(p, n):
    import numpy as np
    chunk = 1 << 18
    x = np.random.default_rng(1).standard_normal((min(chunk, n), p))
    c = np.zeros((p, p))
    dt, done = 0.0, 0
    while done < n:
        m = min(chunk, n - done)
        a = x[:m]
        t = time.perf_counter()
        c += np.dot(a.T, a)  # numpy calls dsyrk when both operands are one array
        dt += time.perf_counter() - t
        done += m
    print("%.3f dsyrk p=%d n=%d, %.1f GFLOP/s (p(p+1)n flops)" % (dt, p, n, p * (p + 1) * n / dt / 1e9))


def kernel():
    from threadpoolctl import threadpool_info
    import numpy  # noqa: F401 (loads the BLAS threadpoolctl reports)
    for i in threadpool_info():
        if i.get("user_api") == "blas":
            print("0 %s %s kernel %s, %d threads" % (i.get("internal_api"), i.get("version"), i.get("architecture"), i.get("num_threads")))
            return
    print("0 no BLAS found by threadpoolctl")


if __name__ == "__main__":
    cmd = sys.argv[1]
    if cmd == "read":
        read(sys.argv[2])
    elif cmd == "syrk":
        syrk(int(sys.argv[2]), int(sys.argv[3]))
    else:
        kernel()

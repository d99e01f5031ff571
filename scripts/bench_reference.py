"""What make bench measures bandfold against, outside bandfold.

The floors, the two resources learn cannot go below (each prints one line:
seconds, then a description):
  bench_reference.py read FILE   GDAL reading every block of FILE (all bands)
                                 with GTIFF_DIRECT_IO, as a tiled reader must.
  bench_reference.py read2 FILE  the same on two threads, each with its own
                                 dataset, taking every other block: what
                                 reading costs when it has both cores (GDAL's
                                 Python bindings let go of the interpreter's
                                 lock while they read).
  bench_reference.py syrk P N    OpenBLAS dsyrk (through numpy) forming the
                                 P x P cross-product of N float64 pixels, in
                                 chunks of 2^18 pixels, timing the products.
  bench_reference.py kernel      which BLAS numpy loaded and its CPU kernel.
  bench_reference.py change-floor BEFORE AFTER CHANGE_DIR OUT
                                 what change cannot avoid (its I/O floor):
                                 GDAL reading every block of both dates
                                 twice (as read does), writing Z (the
                                 float32 values of CHANGE_DIR/magnitude.tif,
                                 read beforehand) to OUT with change's
                                 creation options, and GDAL's sieve on a
                                 Byte map of the scene's size (the flags
                                 of CHANGE_DIR/change.tif, nodata 255) at
                                 change's minimum mapping unit of 4 pixels.
The baselines, timed whole from outside:
  bench_reference.py numpy-learn FILE
                                 the in-memory approach: the whole cube as
                                 float64, numpy.cov, numpy.linalg.eigh.
  bench_reference.py gdal-fold FILE K OUT [VALUES]
                                 GDAL alone reading FILE tile by tile and
                                 writing K float32 bands with bandfold's
                                 creation options: stand-in values made
                                 from FILE's bands, or, with VALUES (a
                                 K-band file such as fold's own output), the
                                 values of VALUES, so that the compressor
                                 gets the same content as bandfold's.
"""
import sys
import time


def read(path):
    from osgeo import gdal
    ds = gdal.Open(path)
    bw, bh = ds.GetRasterBand(1).GetBlockSize()
    w, h, p = ds.RasterXSize, ds.RasterYSize, ds.RasterCount
    dt, nbytes = read_blocks(path)
    print("%.3f read %d bands x %d x %d in %d x %d blocks, %.0f MiB, %.2f GiB/s"
          % (dt, p, w, h, bw, bh, nbytes / 2**20, nbytes / dt / 2**30))


def read_blocks(path, threads=1):
    """Reads every block of path (all bands) with GTIFF_DIRECT_IO, as a
    tiled reader must, on threads threads (each with its own dataset,
    taking every threads-th block); returns the seconds taken and the bytes
    read."""
    import threading
    from osgeo import gdal
    gdal.UseExceptions()
    gdal.SetConfigOption("GTIFF_DIRECT_IO", "YES")
    ds = gdal.Open(path)
    bw, bh = ds.GetRasterBand(1).GetBlockSize()
    w, h = ds.RasterXSize, ds.RasterYSize
    blocks = [(x, y) for y in range(0, h, bh) for x in range(0, w, bw)]
    handles = [ds] + [gdal.Open(path) for _ in range(threads - 1)]
    nbytes = [0] * threads

    def part(i):
        for x, y in blocks[i::threads]:
            nbytes[i] += len(handles[i].ReadRaster(x, y, min(bw, w - x), min(bh, h - y)))

    t = time.perf_counter()
    if threads == 1:
        part(0)
    else:
        workers = [threading.Thread(target=part, args=(i,)) for i in range(threads)]
        for th in workers:
            th.start()
        for th in workers:
            th.join()
    return time.perf_counter() - t, sum(nbytes)


def read2(path):
    from osgeo import gdal
    ds = gdal.Open(path)
    dt, nbytes = read_blocks(path, 2)
    print("%.3f read %d bands x %d x %d on 2 threads, %.0f MiB, %.2f GiB/s"
          % (dt, ds.RasterCount, ds.RasterXSize, ds.RasterYSize, nbytes / 2**20, nbytes / dt / 2**30))


def change_floor(before, after, change_dir, out):
    import os
    from osgeo import gdal
    gdal.UseExceptions()
    reads = 0.0
    for _ in range(2):
        for path in (before, after):
            reads += read_blocks(path)[0]
    # Z: change's own values, so that the compressor gets the same content.
    mag = gdal.Open(os.path.join(change_dir, "magnitude.tif"))
    z = mag.GetRasterBand(1).ReadAsArray()
    w, h = mag.RasterXSize, mag.RasterYSize
    opts = ["TILED=YES", "BLOCKXSIZE=256", "BLOCKYSIZE=256", "COMPRESS=ZSTD", "ZSTD_LEVEL=1", "PREDICTOR=3",
            "BIGTIFF=IF_SAFER", "NUM_THREADS=ALL_CPUS"]
    t = time.perf_counter()
    dst = gdal.GetDriverByName("GTiff").Create(out, w, h, 1, gdal.GDT_Float32, opts)
    band = dst.GetRasterBand(1)
    band.SetNoDataValue(float("nan"))
    for y in range(0, h, 256):
        band.WriteArray(z[y:y + 256], 0, y)
    band = None
    dst = None  # closing flushes the last blocks
    write = time.perf_counter() - t
    # The sieve: a Byte map in memory, nodata 255 masked, 8-connected.
    chg = gdal.Open(os.path.join(change_dir, "change.tif"))
    flags = chg.GetRasterBand(1).ReadAsArray()
    mem = gdal.GetDriverByName("MEM").Create("", w, h, 2, gdal.GDT_Byte)
    src = mem.GetRasterBand(1)
    src.WriteArray(flags)
    src.SetNoDataValue(255)
    t = time.perf_counter()
    gdal.SieveFilter(src, src.GetMaskBand(), mem.GetRasterBand(2), 4, 8)
    sieve = time.perf_counter() - t
    src = mem = None
    print("%.3f I/O floor of change: read both dates twice %.3f s, write Z %.3f s (%.0f MB), sieve %.3f s"
          % (reads + write + sieve, reads, write, os.path.getsize(out) / 1e6, sieve))


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


def numpy_learn(path):
    import numpy as np
    from osgeo import gdal
    ds = gdal.Open(path)
    x = ds.ReadAsArray().reshape(ds.RasterCount, -1).astype(np.float64)
    np.linalg.eigh(np.cov(x))


def gdal_fold(path, k, out, values=None):
    # The stand-in values are the input's first k bands times an irrational
    # factor, so that they are real-valued like component scores: DEFLATE's
    # speed depends on the content, and integral floats compress far faster.
    # Real scores compress worse still, hence VALUES.
    from osgeo import gdal
    gdal.UseExceptions()
    src = gdal.Open(path)
    vals = gdal.Open(values) if values else None
    opts = ["TILED=YES", "BLOCKXSIZE=256", "BLOCKYSIZE=256", "COMPRESS=DEFLATE", "PREDICTOR=3",
            "ZLEVEL=1", "BIGTIFF=IF_SAFER", "NUM_THREADS=ALL_CPUS"]
    dst = gdal.GetDriverByName("GTiff").Create(out, src.RasterXSize, src.RasterYSize, k, gdal.GDT_Float32, opts)
    step = 256
    for y in range(0, src.RasterYSize, step):
        h = min(step, src.RasterYSize - y)
        a = src.ReadAsArray(0, y, src.RasterXSize, h).astype("float32") * 0.70710678 + 0.318
        if vals is not None:
            a = vals.ReadAsArray(0, y, src.RasterXSize, h).astype("float32").reshape(k, h, src.RasterXSize)
        for b in range(k):
            dst.GetRasterBand(b + 1).WriteArray(a[b], 0, y)
    dst = None


if __name__ == "__main__":
    cmd = sys.argv[1]
    if cmd == "read":
        read(sys.argv[2])
    elif cmd == "read2":
        read2(sys.argv[2])
    elif cmd == "syrk":
        syrk(int(sys.argv[2]), int(sys.argv[3]))
    elif cmd == "numpy-learn":
        numpy_learn(sys.argv[2])
    elif cmd == "gdal-fold":
        gdal_fold(sys.argv[2], int(sys.argv[3]), sys.argv[4], sys.argv[5] if len(sys.argv) > 5 else None)
    elif cmd == "change-floor":
        change_floor(sys.argv[2], sys.argv[3], sys.argv[4], sys.argv[5])
    elif cmd == "kernel":
        kernel()
    else:
        sys.exit("bench_reference.py: unknown command " + cmd)

package jobtest

import (
	"bytes"
	"fmt"
	"io"
	"log"
	"math"
	"net"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/raster"
	"bandfold/tiles"
)

// The remote tests read images through GDAL's /vsicurl/ from an HTTP server
// of their own on 127.0.0.1: the README promises that IMAGE arguments may be
// GDAL virtual paths.
//
// GDAL configuration. raster.Init (TestMain) sets
// GDAL_DISABLE_READDIR_ON_OPEN=EMPTY_DIR and
// CPL_VSIL_CURL_ALLOWED_EXTENSIONS (.tif among them) with
// CPLSetConfigOption, unless the environment already has them; the tests
// check their effect instead of trusting it: the server must see requests
// for the image and nothing else (no folder listing, no sidecar probes).
// GDAL reads the other options below from the environment whenever a
// /vsicurl/ file is opened (CPLGetConfigOption falls back to getenv, and a
// cgo program's os.Setenv reaches the C environment), so t.Setenv suffices.
// GDAL caches /vsicurl/ contents by URL for the life of the process; every
// server listens on a fresh port, so no URL is ever reused across servers.
func remoteConfig(t *testing.T) {
	t.Helper()
	t.Setenv("GDAL_HTTP_MAX_RETRY", "0") // a broken connection fails at once
	t.Setenv("GDAL_HTTP_TIMEOUT", "5")
	t.Setenv("GDAL_HTTP_CONNECTTIMEOUT", "2")
	// libcurl honours the proxy variables: never send 127.0.0.1 through one.
	t.Setenv("no_proxy", "127.0.0.1")
	t.Setenv("NO_PROXY", "127.0.0.1")
}

// imageServer serves the files of a folder over HTTP on 127.0.0.1 with
// range requests (http.FileServer), recording every request. With cut > 0,
// a GET whose byte range reaches offset cut or beyond fails the way a
// broken network does: drop closes the connection without a reply,
// otherwise the reply is cut off after half its body.
type imageServer struct {
	*httptest.Server
	files http.Handler
	cut   int64
	drop  bool

	mu       sync.Mutex
	requests []string // "METHOD path range"
	failed   int
}

func newImageServer(t *testing.T, dir string, cut int64, drop bool) *imageServer {
	t.Helper()
	s := &imageServer{files: http.FileServer(http.Dir(dir)), cut: cut, drop: drop}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	s.Server = httptest.NewUnstartedServer(s)
	s.Server.Listener.Close()
	s.Server.Listener = ln
	s.Server.Config.ErrorLog = log.New(io.Discard, "", 0)
	s.Start()
	t.Cleanup(s.Close)
	return s
}

// url is the /vsicurl/ path of file name on the server.
func (s *imageServer) url(name string) string { return "/vsicurl/" + s.URL + "/" + name }

func (s *imageServer) ServeHTTP(w http.ResponseWriter, r *http.Request) {
	rng := r.Header.Get("Range")
	s.mu.Lock()
	s.requests = append(s.requests, fmt.Sprintf("%s %s %s", r.Method, r.URL.Path, rng))
	s.mu.Unlock()
	if s.cut > 0 && r.Method == http.MethodGet && rangeEnd(rng) >= s.cut {
		s.mu.Lock()
		s.failed++
		s.mu.Unlock()
		if s.drop {
			conn, _, err := http.NewResponseController(w).Hijack()
			if err == nil {
				conn.Close()
			}
			return
		}
		s.files.ServeHTTP(&truncated{ResponseWriter: w}, r)
		return
	}
	s.files.ServeHTTP(w, r)
}

// paths returns the distinct paths requested, and the number of requests
// that were made to fail.
func (s *imageServer) paths() ([]string, int) {
	s.mu.Lock()
	defer s.mu.Unlock()
	var out []string
	for _, r := range s.requests {
		p := strings.Fields(r)[1]
		if !slices.Contains(out, p) {
			out = append(out, p)
		}
	}
	return out, s.failed
}

func (s *imageServer) log() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return strings.Join(s.requests, "\n")
}

// rangeEnd is the last byte offset a Range header asks for ("bytes=a-b" or
// several ranges separated by commas), or -1 for none; an open range
// ("a-") counts as reaching the end of any file.
func rangeEnd(h string) int64 {
	spec, ok := strings.CutPrefix(h, "bytes=")
	if !ok {
		return -1
	}
	end := int64(-1)
	for _, r := range strings.Split(spec, ",") {
		_, b, _ := strings.Cut(strings.TrimSpace(r), "-")
		if b == "" {
			return math.MaxInt64
		}
		if v, err := strconv.ParseInt(b, 10, 64); err == nil {
			end = max(end, v)
		}
	}
	return end
}

// truncated sends the status, the headers (with the full Content-Length)
// and the first half of the body, then closes the connection.
type truncated struct {
	http.ResponseWriter
	left, total int64
	started     bool
}

func (w *truncated) Write(p []byte) (int, error) {
	if !w.started {
		w.started = true
		w.total, _ = strconv.ParseInt(w.Header().Get("Content-Length"), 10, 64)
		w.left = w.total / 2
	}
	if int64(len(p)) <= w.left {
		w.left -= int64(len(p))
		return w.ResponseWriter.Write(p)
	}
	w.ResponseWriter.Write(p[:w.left])
	http.NewResponseController(w.ResponseWriter).Flush()
	panic(http.ErrAbortHandler) // net/http closes the connection silently
}

// remoteImages writes, into dir, a tiled GeoTIFF (Synth: int16, 6 bands,
// 16 x 16 blocks, uncompressed) and a copy of it as a Cloud Optimized
// GeoTIFF made by GDAL's COG driver (DEFLATE, 128 x 128 blocks). It returns
// their file names.
func remoteImages(t *testing.T, dir string) []string {
	t.Helper()
	gtiff, cog := "cube.tif", "cube-cog.tif"
	_, err := demo.Synth(t.Context(), TestEnv, demo.SynthOptions{Bands: 6, Width: 256, Height: 256, Type: "int16",
		Block: 16, Interleave: "pixel", Out: filepath.Join(dir, gtiff), Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	s, buf, _ := ReadImage(t, filepath.Join(dir, gtiff), tiles.Tile{})
	WriteRasterFile(t, filepath.Join(dir, cog), raster.Spec{Grid: s.Grid, Bands: s.Len(), DataType: "Int16",
		Format: raster.COG, CreationOptions: []string{"BLOCKSIZE=128"}}, buf)
	// GDAL's COG driver writes the ghost header "LAYOUT=IFDS_BEFORE_DATA"
	// near the start of every COG (GDAL's COG driver documentation): the
	// copy is a real COG.
	head := make([]byte, 512)
	f, err := os.Open(filepath.Join(dir, cog))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if _, err := io.ReadFull(f, head); err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(head, []byte("LAYOUT=IFDS_BEFORE_DATA")) {
		t.Fatalf("%s has no COG ghost header: %q", cog, head)
	}
	return []string{gtiff, cog}
}

// needCurl skips the test when GDAL cannot open url through /vsicurl/ and
// the server saw no request: a GDAL built without curl has no /vsicurl/.
func needCurl(t *testing.T, srv *imageServer, url string) {
	t.Helper()
	s, err := raster.Open([]string{url})
	if err == nil {
		s.Close()
		return
	}
	if p, _ := srv.paths(); len(p) == 0 {
		t.Skipf("GDAL cannot read /vsicurl/ paths (built without curl?): %v", err)
	}
	t.Fatalf("open %s: %v\nrequests:\n%s", url, err, srv.log())
}

// onlyImages fails unless every request the server saw was for one of names.
func onlyImages(t *testing.T, srv *imageServer, names ...string) {
	t.Helper()
	paths, _ := srv.paths()
	for _, p := range paths {
		if !slices.Contains(names, strings.TrimPrefix(p, "/")) {
			t.Errorf("GDAL requested %s besides the images %v (folder listing or sidecar probe):\n%s", p, names, srv.log())
		}
	}
}

// TestRemoteLearnFold learns and folds a tiled GeoTIFF and a COG read over
// HTTP and checks that the basis and the component image are exactly those
// made from the same file read locally.
func TestRemoteLearnFold(t *testing.T) {
	remoteConfig(t)
	dir := t.TempDir()
	names := remoteImages(t, dir)
	srv := newImageServer(t, dir, 0, false)
	needCurl(t, srv, srv.url(names[0]))
	out := t.TempDir()
	for _, name := range names {
		local, remote := filepath.Join(dir, name), srv.url(name)
		stem := strings.TrimSuffix(name, ".tif")
		lb := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{local}, Out: filepath.Join(out, stem+".local.basis.json")})
		rb := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{remote}, Out: filepath.Join(out, stem+".remote.basis.json")})
		// The same pixels in the same tiles give the same basis, bit for
		// bit (known by construction: the fingerprint hashes every number
		// of the fit).
		if lf, rf := lb.Basis.Fingerprint(), rb.Basis.Fingerprint(); lf != rf {
			t.Errorf("%s: basis fingerprint %s over HTTP, %s locally", name, rf, lf)
		}
		if lb.Basis.Pixels != rb.Basis.Pixels || lb.Basis.Components != rb.Basis.Components {
			t.Errorf("%s: %d pixels, k = %d over HTTP; %d, k = %d locally", name,
				rb.Basis.Pixels, rb.Basis.Components, lb.Basis.Pixels, lb.Basis.Components)
		}
		// A virtual input is recorded by its path, without size (known by
		// construction: fingerprints).
		if in := rb.Basis.Inputs; len(in) != 1 || in[0].Path != remote || in[0].Size != -1 {
			t.Errorf("%s: remote basis inputs %+v, want the URL %s with size -1", name, in, remote)
		}

		basis := lb.Path
		lo, ro := filepath.Join(out, stem+".local.pc.tif"), filepath.Join(out, stem+".remote.pc.tif")
		lf := Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{local}, Basis: basis, Out: lo})
		rf := Fold(t, TestEnv, fold.FoldOptions{Scenes: []string{remote}, Basis: basis, Out: ro})
		if lf.Pixels != rf.Pixels || lf.Pixels != lb.Basis.Pixels {
			t.Errorf("%s: folded %d pixels over HTTP, %d locally, learned on %d", name, rf.Pixels, lf.Pixels, lb.Basis.Pixels)
		}
		ls, lbuf, lvalid := ReadImage(t, lo, tiles.Tile{})
		rs, rbuf, rvalid := ReadImage(t, ro, tiles.Tile{})
		if ls.Len() != rs.Len() || ls.Width != rs.Width || ls.Height != rs.Height {
			t.Fatalf("%s: component image %dx%dx%d over HTTP, %dx%dx%d locally", name,
				rs.Width, rs.Height, rs.Len(), ls.Width, ls.Height, ls.Len())
		}
		// The same basis and the same pixels give the same scores, bit for
		// bit (known by construction).
		diff := 0
		for i := range lbuf {
			if math.Float64bits(lbuf[i]) != math.Float64bits(rbuf[i]) {
				diff++
			}
		}
		if diff > 0 || !slices.Equal(lvalid, rvalid) {
			t.Errorf("%s: %d of %d component values differ between HTTP and local input", name, diff, len(lbuf))
		}
	}
	onlyImages(t, srv, names...)
	NoTemporaries(t, out)
}

// TestRemoteBrokenConnection reads images from servers that break every
// range request reaching past the middle of the file (the headers and
// first directory are before it) and checks that learn and fold fail with
// one line naming the URL and write nothing.
func TestRemoteBrokenConnection(t *testing.T) {
	remoteConfig(t)
	dir := t.TempDir()
	names := remoteImages(t, dir)
	for _, name := range names {
		fi, err := os.Stat(filepath.Join(dir, name))
		if err != nil {
			t.Fatal(err)
		}
		for _, drop := range []bool{true, false} {
			how := "truncated"
			if drop {
				how = "dropped"
			}
			out := t.TempDir()
			local := filepath.Join(dir, name)
			basis := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{local}, Out: filepath.Join(out, "local.basis.json")}).Path
			for _, step := range []string{"learn", "fold"} {
				// A fresh server for every run: GDAL keeps what it read
				// from a URL for the life of the process.
				srv := newImageServer(t, dir, fi.Size()/2, drop)
				url := srv.url(name)
				target := filepath.Join(out, step+".out")
				start := time.Now()
				var err error
				switch step {
				case "learn":
					target += ".json"
					_, err = learn.Learn(t.Context(), TestEnv, learn.LearnOptions{Scenes: []string{url}, Out: target, Variance: DefaultVariance})
				case "fold":
					target += ".tif"
					_, err = fold.Fold(t.Context(), TestEnv, fold.FoldOptions{Scenes: []string{url}, Basis: basis, Out: target})
				}
				label := fmt.Sprintf("%s %s %s", name, how, step)
				if _, failed := srv.paths(); failed == 0 {
					t.Errorf("%s: no request was broken; requests:\n%s", label, srv.log())
				}
				WantError(t, label, err, false, url)
				if err != nil && strings.Contains(err.Error(), "\n") {
					t.Errorf("%s: error spans lines: %q", label, err)
				}
				if d := time.Since(start); d > 5*time.Second {
					t.Errorf("%s: took %v to fail: GDAL retried?", label, d)
				}
				MustNotExist(t, label, target)
				NoTemporaries(t, out)
				onlyImages(t, srv, name)
			}
		}
	}
}

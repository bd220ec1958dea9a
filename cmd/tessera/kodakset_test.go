package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/patches/patchtest"
)

var sharedRef = patchtest.SharedPath

// kodakServer serves the files of ../shared/kodak, with body overriding
// the content of some names, and counts the requests.
func kodakServer(t *testing.T, body map[string][]byte) (*httptest.Server, *atomic.Int32) {
	t.Helper()
	dir := sharedRef(t, "kodak")
	var n atomic.Int32
	srv := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		n.Add(1)
		name := strings.TrimPrefix(r.URL.Path, "/set/")
		if b, ok := body[name]; ok {
			w.Write(b)
			return
		}
		if _, ok := kodakFind(name); !ok || strings.Contains(name, "/") {
			http.NotFound(w, r)
			return
		}
		http.ServeFile(w, r, filepath.Join(dir, name))
	}))
	t.Cleanup(srv.Close)
	return srv, &n
}

func fileSHA(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// TestKodakTable: the embedded table is the reference data's kodak_pixels
// (24 images, sizes and decoded-pixel SHA-256), and the copies in
// ../shared/kodak decode to those pixels.
func TestKodakTable(t *testing.T) {
	raw, err := os.ReadFile(sharedRef(t, "reference", "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Pixels map[string]struct {
			Width, Height int
			RGB8          string `json:"rgb8_sha256"`
		} `json:"kodak_pixels"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Pixels) != 24 {
		t.Fatalf("reference lists %d images", len(ref.Pixels))
	}
	for _, k := range kodakSet {
		r, ok := ref.Pixels[k.name]
		if !ok || r.Width != k.w || r.Height != k.h || r.RGB8 != k.rgb {
			t.Errorf("%s: table %d×%d %s, reference %+v", k.name, k.w, k.h, k.rgb, r)
		}
	}
	for _, i := range []int{0, 3} { // one landscape, one portrait
		k := kodakSet[i]
		f, err := imgfile.DecodeFile(sharedRef(t, "kodak", k.name), 0)
		if err != nil {
			t.Fatal(err)
		}
		if why := kodakCheck(f.Img, k); why != "" {
			t.Errorf("%s: %s", k.name, why)
		}
	}
}

// TestKodakDownload: missing images are fetched, verified and cached
// byte for byte; a second call asks the server nothing; a damaged cached
// file is fetched again.
func TestKodakDownload(t *testing.T) {
	srv, n := kodakServer(t, nil)
	cache := filepath.Join(t.TempDir(), "tessera", "kodak")
	var notes []string
	f := &kodakFetcher{dir: cache, base: srv.URL + "/set/", note: func(s string) { notes = append(notes, s) }}
	want := []kodakImage{kodakSet[1], kodakSet[8]}
	paths, err := f.ensure(want)
	if err != nil {
		t.Fatal(err)
	}
	if n.Load() != 2 {
		t.Fatalf("%d requests for 2 missing images", n.Load())
	}
	for i, p := range paths {
		if p != filepath.Join(cache, want[i].name) {
			t.Fatalf("path %s", p)
		}
		if fileSHA(t, p) != fileSHA(t, sharedRef(t, "kodak", want[i].name)) {
			t.Fatalf("%s: the cached bytes differ from the served file", p)
		}
	}
	if _, err := f.ensure(want); err != nil || n.Load() != 2 {
		t.Fatalf("second call: err %v, %d requests in all (want 2)", err, n.Load())
	}
	// A cached file replaced by another image is noticed and fetched again.
	b, _ := os.ReadFile(sharedRef(t, "kodak", "kodim05.png"))
	os.WriteFile(paths[0], b, 0o644)
	notes = nil
	if _, err := f.ensure(want); err != nil || n.Load() != 3 {
		t.Fatalf("after damage: err %v, %d requests in all (want 3)", err, n.Load())
	}
	if len(notes) == 0 || !strings.Contains(notes[0], "does not verify") {
		t.Fatalf("notes %q", notes)
	}
	if fileSHA(t, paths[0]) != fileSHA(t, sharedRef(t, "kodak", want[0].name)) {
		t.Fatal("the damaged cached file was not replaced")
	}
}

// TestKodakRefusesBadFiles: a truncated file and a valid PNG whose pixels
// differ by one sample are refused with the image named, and nothing (not
// even a temporary file) is left in the cache.
func TestKodakRefusesBadFiles(t *testing.T) {
	orig, err := os.ReadFile(sharedRef(t, "kodak", "kodim03.png"))
	if err != nil {
		t.Fatal(err)
	}
	f3, err := imgfile.Decode(bytes.NewReader(orig), "kodim03.png", 0)
	if err != nil {
		t.Fatal(err)
	}
	f3.Img.Pix[1000] = 255 - f3.Img.Pix[1000]
	var altered bytes.Buffer
	if err := imgfile.Encode(&altered, f3, "png"); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		body []byte
		want string
	}{
		{"truncated", orig[:len(orig)/2], "not a readable image"},
		{"one sample changed", altered.Bytes(), "do not match the published image"},
	} {
		t.Run(c.name, func(t *testing.T) {
			srv, _ := kodakServer(t, map[string][]byte{"kodim03.png": c.body})
			cache := t.TempDir()
			f := &kodakFetcher{dir: cache, base: srv.URL + "/set/", note: func(string) {}}
			_, err := f.ensure([]kodakImage{kodakSet[2]})
			var ke *kodakError
			if !errors.As(err, &ke) || ke.Name != "kodim03.png" || ke.Kind != "content" {
				t.Fatalf("error %v, want a content kodakError for kodim03.png", err)
			}
			msg := err.Error()
			if !strings.Contains(msg, c.want) || !strings.Contains(msg, "nothing was cached") || strings.Contains(msg, "\n") {
				t.Fatalf("message %q", msg)
			}
			if ents, _ := os.ReadDir(cache); len(ents) != 0 {
				t.Fatalf("cache holds %v after a refused file", ents)
			}
		})
	}
}

// TestKodakOffline: an unreachable server and a wrong address give
// one-line errors that say what to do.
func TestKodakOffline(t *testing.T) {
	srv, _ := kodakServer(t, nil)
	url := srv.URL + "/set/"
	srv.Close()
	f := &kodakFetcher{dir: t.TempDir(), base: url, note: func(string) {}}
	_, err := f.ensure([]kodakImage{kodakSet[0]})
	var ke *kodakError
	if !errors.As(err, &ke) || ke.Kind != "network" || !strings.Contains(err.Error(), "offline") ||
		!strings.Contains(err.Error(), "--set FOLDER") || !strings.Contains(err.Error(), "kodim01.png") {
		t.Fatalf("offline: %v", err)
	}
	srv2, _ := kodakServer(t, nil)
	f.base = srv2.URL + "/elsewhere/"
	_, err = f.ensure([]kodakImage{kodakSet[0]})
	if !errors.As(err, &ke) || ke.Kind != "address" || !strings.Contains(err.Error(), "404") || !strings.Contains(err.Error(), "--set-url") {
		t.Fatalf("wrong address: %v", err)
	}
}

func TestKodakBaseURL(t *testing.T) {
	env := func(v string) func(string) string {
		return func(k string) string {
			if k == kodakURLEnv {
				return v
			}
			return ""
		}
	}
	for _, c := range []struct{ flag, env, want string }{
		{"", "", defaultKodakURL},
		{"", "http://mirror.test/k", "http://mirror.test/k/"},
		{"https://a.test/x/", "http://mirror.test/k", "https://a.test/x/"},
	} {
		if got, err := kodakBaseURL(c.flag, env(c.env)); err != nil || got != c.want {
			t.Errorf("flag %q env %q: %q %v, want %q", c.flag, c.env, got, err, c.want)
		}
	}
	for _, bad := range []string{"ftp://a.test/", "a.test/kodak", "http://"} {
		var ue *usageError
		if _, err := kodakBaseURL(bad, env("")); !errors.As(err, &ue) {
			t.Errorf("--set-url %q: %v, want a usage error", bad, err)
		}
	}
}

// TestBenchKodakSetE2E: tessera bench --set kodak downloads from
// TESSERA_KODAK_URL into the user's cache folder and measures; a damaged
// download fails with status 1, names the file, and caches nothing.
func TestBenchKodakSetE2E(t *testing.T) {
	needBin(t)
	srv, _ := kodakServer(t, map[string][]byte{"kodim04.png": []byte("\x89PNG\r\n\x1a\nbroken")})
	dir := t.TempDir()
	cache := filepath.Join(dir, "cache")
	env := []string{"XDG_CACHE_HOME=" + cache, kodakURLEnv + "=" + srv.URL + "/set/"}
	cheap := []string{"bench", "--sigma", "25", "--rounds", "0", "--atoms", "4", "--bound", "4"}
	r := tessera(t, dir, nil, env, append(cheap, "--images", "2")...)
	r.want(t, 0, "downloading 1 image(s)")
	if fileSHA(t, filepath.Join(cache, "tessera", "kodak", "kodim02.png")) != fileSHA(t, sharedRef(t, "kodak", "kodim02.png")) {
		t.Fatal("kodim02.png not cached as served")
	}
	if !strings.Contains(r.stdout, "| kodim02.png | 25 | ksvd | 20.1") {
		t.Fatalf("table:\n%s", r.stdout)
	}
	r = tessera(t, dir, nil, env, append(cheap, "--images", "4")...)
	r.want(t, 1, "kodim04.png from "+srv.URL+"/set/kodim04.png", "nothing was cached")
	if _, err := os.Stat(filepath.Join(cache, "tessera", "kodak", "kodim04.png")); err == nil {
		t.Fatal("a broken download was cached")
	}
}

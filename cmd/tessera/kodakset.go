package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"os"
	"path/filepath"
	"strings"
	"time"

	"tessera/cmd/tessera/internal/imgfile"
	"tessera/patches"
)

// kodakImage is one image of the Kodak Lossless True Color Image Suite:
// its file name, size, and the SHA-256 of its decoded pixels (8-bit R, G,
// B interleaved, row-major), which any lossless copy shares whatever its
// file bytes are.
type kodakImage struct {
	name string
	w, h int
	rgb  string // hex SHA-256 of the pixels
}

// kodakSet lists the 24 images with the pixel hashes published with the
// project's reference data (reference.json, kodak_pixels).
var kodakSet = [24]kodakImage{
	{"kodim01.png", 768, 512, "a00210743353594464ac67e680a41710f484444ca5f9dfddeb570de25c428273"},
	{"kodim02.png", 768, 512, "ae5a495df4ec40e0941265440ccf98973915b4190ab803e37a23ca93dd43a07e"},
	{"kodim03.png", 768, 512, "234e61f585503f2a44400f5561131e8a512ef2c15328cd83d5cdbf10e2616cf2"},
	{"kodim04.png", 512, 768, "e88e788fca00e6c723bb66ff45edb8cb56091ee284dcb73e3909834f2c96eeb6"},
	{"kodim05.png", 768, 512, "ed3d1ee770909d3b27903b52ce19ee59a9bf24621a7bf1fb57b90677da880cb6"},
	{"kodim06.png", 768, 512, "7f45158999fa297d1cfbd292b3e2f3f5b27770701c3473155c211c3f512cc97f"},
	{"kodim07.png", 768, 512, "4e3664bf6fe865b49f15f7b554efa7dbecaf73ae0e8699f2e307bf07849f1264"},
	{"kodim08.png", 768, 512, "889c3740e4ed54ca53d11ae735a44d15fa24fe312b3bd1609a80618a4092c208"},
	{"kodim09.png", 512, 768, "f8453140e63a42301a6dbebb849a3cc40d34e4e59580eb1f372f7f5460df0dbe"},
	{"kodim10.png", 512, 768, "fabe11b5c4f028394e093a5b5907e5fabc8072da0d5334fb3a38547a7e1be842"},
	{"kodim11.png", 768, 512, "ab4dd9bf8431e717d33892b3ba03c63bfea3c7fa72c2610010de7df3c194c075"},
	{"kodim12.png", 768, 512, "f412db2168e599949aac26bd3264f111b23a684f30a21cfd320e9e95bc69bbae"},
	{"kodim13.png", 768, 512, "875703d56fb9396f478b5d7d3b18e2b77c17147a685c6dc2567e1c574aaf01e3"},
	{"kodim14.png", 768, 512, "2bd5029ee75ac1697542e5b05624e8afe186e3250abd7513d6a806b52084c2f0"},
	{"kodim15.png", 768, 512, "b5353e7511277009922ecbdebfc6418fec53aa1b2a08d44fc957a7540825697b"},
	{"kodim16.png", 768, 512, "ed21745fd32fce95cc2c6af7fc52b1b15e590c7a14ab18ab34bd65ecaf955ac7"},
	{"kodim17.png", 512, 768, "566bc866664e9b06dc86e2654051b454844efe17322dbf7e24156d8243f1943e"},
	{"kodim18.png", 512, 768, "3475af71066f3ca8206eb12cfc989ebe9c6e44820a96604e88ae018606e1f7bd"},
	{"kodim19.png", 512, 768, "7956408ef24222d37ac53f579bd24d5b2c3557b16c657e8b71c1b6ae9f18de1b"},
	{"kodim20.png", 768, 512, "666ce8f2db5566a123bb081e70618f6f4c4253df960f3b41bb9dcc3dd134f3cf"},
	{"kodim21.png", 768, 512, "2d6902daf7c4486b7c8c04d834091841a2b38c8f0c81cd7a963a6510b34a2a6a"},
	{"kodim22.png", 768, 512, "f430842120c108b67725ada96b8b7b2a914f6a0915eacd5595064c6c1a5d70a0"},
	{"kodim23.png", 768, 512, "81992a83592267e69125666f3e3e04c1819529b4c4c1e55fde0a6a741bac4219"},
	{"kodim24.png", 768, 512, "e3e3ccc3e795b82a3da66934409dfe98ce0f5aadc6d7767543c506453599bb98"},
}

const (
	defaultKodakURL = "https://r0k.us/graphics/kodak/kodak/"
	kodakURLEnv     = "TESSERA_KODAK_URL"
	// kodakMaxBytes bounds one download: the PNG copies are under 1 MB and
	// an uncompressed 768×512 RGB file is 1.2 MB.
	kodakMaxBytes = 16 << 20
)

// kodakFind returns the set entry named name, if any.
func kodakFind(name string) (kodakImage, bool) {
	for _, k := range kodakSet {
		if k.name == name {
			return k, true
		}
	}
	return kodakImage{}, false
}

// kodakError is an image of the set that could not be fetched or did not
// verify. Nothing is cached for it.
type kodakError struct {
	Name   string // kodimNN.png
	Source string // URL it came from
	Reason string
	Kind   string // "network", "address" (the server has no such file) or "content"
}

const kodakByHand = "download kodim01.png … kodim24.png by hand (from " + defaultKodakURL + " or any lossless copy) into a folder and run tessera bench --set FOLDER"

func (e *kodakError) Error() string {
	var fix string
	switch e.Kind {
	case "network":
		fix = "if this machine is offline, " + kodakByHand
	case "address":
		fix = "check --set-url or " + kodakURLEnv + " (the folder that holds the 24 files), or " + kodakByHand
	default:
		fix = "nothing was cached; try again, point --set-url at another lossless copy, or " + kodakByHand
	}
	return fmt.Sprintf("%s from %s: %s; %s", e.Name, e.Source, e.Reason, fix)
}

// pixelSHA256 hashes an 8-bit image's samples as R, G, B interleaved,
// row-major bytes.
func pixelSHA256(img *patches.Image) string {
	n := img.W * img.H
	buf := make([]byte, n*img.C)
	for c := 0; c < img.C; c++ {
		pl := img.Plane(c)
		for i, v := range pl {
			buf[i*img.C+c] = byte(v)
		}
	}
	s := sha256.Sum256(buf)
	return hex.EncodeToString(s[:])
}

// kodakCheck says what is wrong with img as a copy of k, or "" when it is
// the published image.
func kodakCheck(img *patches.Image, k kodakImage) string {
	switch {
	case img.W != k.w || img.H != k.h:
		return fmt.Sprintf("the image is %d×%d, the published one %d×%d", img.W, img.H, k.w, k.h)
	case img.C != 3 || img.Depth != 8:
		return fmt.Sprintf("the image has %d channel(s) at %d bits, the published one is 8-bit RGB", img.C, img.Depth)
	}
	if h := pixelSHA256(img); h != k.rgb {
		return fmt.Sprintf("its decoded pixels do not match the published image (SHA-256 %s…, expected %s…)", h[:12], k.rgb[:12])
	}
	return ""
}

// kodakFetcher finds images of the set in a cache folder and downloads
// the missing ones.
type kodakFetcher struct {
	dir    string // cache folder
	base   string // URL of the folder holding kodimNN.png
	client *http.Client
	note   func(string) // one line for the user
}

// kodakCacheDir is the cache folder of the set: the user's cache folder
// followed by tessera/kodak.
func kodakCacheDir() (string, error) {
	d, err := os.UserCacheDir()
	if err != nil {
		return "", fmt.Errorf("cannot find the user's cache folder (%v); download kodim01.png … kodim24.png by hand into a folder and run tessera bench --set FOLDER", err)
	}
	return filepath.Join(d, "tessera", "kodak"), nil
}

// kodakBaseURL picks the download URL: the flag, else the environment,
// else the set's public home page. It must be http or https.
func kodakBaseURL(flag string, getenv func(string) string) (string, error) {
	u, from := flag, "--set-url"
	if u == "" {
		u, from = getenv(kodakURLEnv), kodakURLEnv
	}
	if u == "" {
		return defaultKodakURL, nil
	}
	p, err := url.Parse(u)
	if err != nil || (p.Scheme != "http" && p.Scheme != "https") || p.Host == "" {
		return "", usagef("%s %q: not an http or https URL; give the address of the folder that holds kodim01.png", from, u)
	}
	if !strings.HasSuffix(u, "/") {
		u += "/"
	}
	return u, nil
}

// ensure returns the cached paths of the images, downloading and
// verifying those missing (or damaged) in the cache. It stops at the
// first image that cannot be had.
func (f *kodakFetcher) ensure(imgs []kodakImage) ([]string, error) {
	paths := make([]string, len(imgs))
	var missing []int
	for i, k := range imgs {
		p := filepath.Join(f.dir, k.name)
		paths[i] = p
		file, err := imgfile.DecodeFile(p, 1<<22)
		switch {
		case errors.Is(err, os.ErrNotExist):
			missing = append(missing, i)
		case err != nil:
			f.note(fmt.Sprintf("tessera: the cached %s cannot be read (%v); downloading it again", p, err))
			missing = append(missing, i)
		default:
			if why := kodakCheck(file.Img, k); why != "" {
				f.note(fmt.Sprintf("tessera: the cached %s does not verify (%s); downloading it again", p, why))
				missing = append(missing, i)
			}
		}
	}
	if len(missing) == 0 {
		return paths, nil
	}
	if err := os.MkdirAll(f.dir, 0o755); err != nil {
		return nil, fmt.Errorf("%s: cannot create the cache folder (%s); use --set FOLDER with a copy of the set", f.dir, errText(err))
	}
	f.note(fmt.Sprintf("tessera: downloading %d image(s) of the Kodak set from %s into %s", len(missing), f.base, f.dir))
	for _, i := range missing {
		data, err := f.fetch(imgs[i])
		if err != nil {
			return nil, err
		}
		if err := writeBytesAtomic(paths[i], data); err != nil {
			return nil, fmt.Errorf("%v; free some space or use --set FOLDER", err)
		}
	}
	return paths, nil
}

// fetch downloads one image and verifies its pixels.
func (f *kodakFetcher) fetch(k kodakImage) ([]byte, error) {
	src := f.base + k.name
	fail := func(kind string, format string, a ...any) error {
		return &kodakError{Name: k.name, Source: src, Reason: fmt.Sprintf(format, a...), Kind: kind}
	}
	client := f.client
	if client == nil {
		client = &http.Client{Timeout: 2 * time.Minute}
	}
	req, err := http.NewRequest(http.MethodGet, src, nil)
	if err != nil {
		return nil, fail("address", "bad address (%v)", err)
	}
	req.Header.Set("User-Agent", "tessera-bench")
	resp, err := client.Do(req)
	if err != nil {
		return nil, fail("network", "cannot download (%v)", err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		kind := "address"
		if resp.StatusCode >= 500 {
			kind = "network"
		}
		return nil, fail(kind, "the server answered %s", resp.Status)
	}
	if resp.ContentLength > kodakMaxBytes {
		return nil, fail("content", "the file is %d bytes, more than any copy of this image", resp.ContentLength)
	}
	data, err := io.ReadAll(io.LimitReader(resp.Body, kodakMaxBytes+1))
	if err != nil {
		return nil, fail("network", "the download broke off (%v)", err)
	}
	if len(data) > kodakMaxBytes {
		return nil, fail("content", "the file is more than %d bytes, more than any copy of this image", kodakMaxBytes)
	}
	file, err := imgfile.Decode(bytes.NewReader(data), k.name, 1<<22)
	if err != nil {
		why := err.Error()
		var fe *imgfile.FormatError
		if errors.As(err, &fe) {
			why = fe.Reason
		}
		return nil, fail("content", "not a readable image (%s)", why)
	}
	if why := kodakCheck(file.Img, k); why != "" {
		return nil, fail("content", "%s", why)
	}
	return data, nil
}

// writeBytesAtomic writes data to a temporary file beside path, flushes
// it and renames it over path.
func writeBytesAtomic(path string, data []byte) (err error) {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return fmt.Errorf("%s: cannot write (%s)", path, errText(err))
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
			err = fmt.Errorf("%s: cannot write (%s)", path, errText(err))
		}
	}()
	if _, err = tmp.Write(data); err != nil {
		return err
	}
	if err = tmp.Chmod(0o644); err != nil {
		return err
	}
	if err = tmp.Sync(); err != nil {
		return err
	}
	if err = tmp.Close(); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}

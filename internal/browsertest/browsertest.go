package browsertest

import (
	"bytes"
	"context"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"sync"
	"testing"

	"github.com/chromedp/chromedp"
)

// Path is where Debian's chromium package installs the browser.
const Path = "/usr/bin/chromium"

// Chromium returns the browser's path, or skips the test when it is not
// installed (fails when VEER_REQUIRE_ALL=1).
func Chromium(t testing.TB) string {
	t.Helper()
	if _, err := os.Stat(Path); err == nil {
		return Path
	}
	if p, err := exec.LookPath("chromium"); err == nil {
		return p
	}
	if os.Getenv("VEER_REQUIRE_ALL") == "1" {
		t.Fatalf("VEER_REQUIRE_ALL=1 but Chromium is not installed at %s (apt-get install chromium)", Path)
	}
	t.Skipf("Chromium is not installed at %s; install the Debian package chromium to run this browser test", Path)
	return ""
}

// New starts a headless Chromium with a fresh profile and a window of the
// given size (plus any extra options) and returns its context; the browser
// stops when the test ends.
// Derive per-step timeouts from the returned context after its first
// chromedp.Run, never before (a timeout on the first Run stops the browser).
func New(t testing.TB, exe string, width, height int, extra ...chromedp.ExecAllocatorOption) context.Context {
	t.Helper()
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(exe),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-quic", true),
		chromedp.UserDataDir(filepath.Join(t.TempDir(), "profile")),
		chromedp.WindowSize(width, height),
	)
	opts = append(opts, extra...)
	actx, cancelA := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancel := chromedp.NewContext(actx)
	t.Cleanup(func() {
		cancel()
		cancelA()
	})
	if err := chromedp.Do(ctx); err != nil {
		t.Fatalf("starting Chromium (%s): %v", exe, err)
	}
	return ctx
}

// Exceptions collects the page's uncaught exceptions and unhandled promise
// rejections from now on; the returned func reads them so far.
func Exceptions(ctx context.Context) func() []string {
	var mu sync.Mutex
	var got []string
	msgs := chromedp.Console(ctx)
	go func() {
		for m, err := range msgs {
			if err != nil {
				return
			}
			if m.IsException() {
				mu.Lock()
				got = append(got, fmt.Sprintf("%s (%s:%d)", m.Text, m.URL, m.Line+1))
				mu.Unlock()
			}
		}
	}()
	return func() []string {
		mu.Lock()
		defer mu.Unlock()
		return append([]string(nil), got...)
	}
}

// Ink returns the share of pixels of img that differ from bg by more than
// tol (0-255) in any colour channel: 0 for a blank picture.
func Ink(img image.Image, bg color.Color, tol uint8) float64 {
	br, bgc, bb, _ := bg.RGBA()
	b := img.Bounds()
	var n, ink int
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			n++
			if diff(r, br) > tol || diff(g, bgc) > tol || diff(bl, bb) > tol {
				ink++
			}
		}
	}
	if n == 0 {
		return 0
	}
	return float64(ink) / float64(n)
}

// Share returns the share of pixels of img for which keep is true, given
// 8-bit red, green and blue.
func Share(img image.Image, keep func(r, g, b uint8) bool) float64 {
	bounds := img.Bounds()
	var n, k int
	for y := bounds.Min.Y; y < bounds.Max.Y; y++ {
		for x := bounds.Min.X; x < bounds.Max.X; x++ {
			r, g, b, _ := img.At(x, y).RGBA()
			n++
			if keep(uint8(r>>8), uint8(g>>8), uint8(b>>8)) {
				k++
			}
		}
	}
	if n == 0 {
		return 0
	}
	return float64(k) / float64(n)
}

func diff(a, b uint32) uint8 {
	a, b = a>>8, b>>8
	if a > b {
		return uint8(a - b)
	}
	return uint8(b - a)
}

// DecodePNG decodes a screenshot or fails the test.
func DecodePNG(t testing.TB, b []byte) image.Image {
	t.Helper()
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("the screenshot is not a PNG: %v", err)
	}
	return img
}

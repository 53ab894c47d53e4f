package report

import (
	"bytes"
	"context"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
)

// chromiumPath is the Debian package's browser.
const chromiumPath = "/usr/bin/chromium"

// needChromium skips when the browser is missing, unless VEER_REQUIRE_ALL=1
// asks for every outside check to run.
func needChromium(t *testing.T) string {
	t.Helper()
	p := chromiumPath
	if _, err := os.Stat(p); err != nil {
		if lp, err2 := exec.LookPath("chromium"); err2 == nil {
			p = lp
		} else {
			if os.Getenv("VEER_REQUIRE_ALL") == "1" {
				t.Fatalf("VEER_REQUIRE_ALL=1 but Chromium is not installed at %s (apt-get install chromium)", chromiumPath)
			}
			t.Skipf("Chromium is not installed at %s; install the Debian package chromium to run the rendering check", chromiumPath)
		}
	}
	return p
}

// inkShare returns the share of pixels in img that are not near-white, and
// the share that are clearly blue (the reference bands and median line).
func inkShare(img image.Image) (ink, blue float64) {
	b := img.Bounds()
	var n, nInk, nBlue int
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			r, g, bl = r>>8, g>>8, bl>>8
			n++
			if r < 235 || g < 235 || bl < 235 {
				nInk++
			}
			if bl > r+40 && bl > 120 {
				nBlue++
			}
		}
	}
	return float64(nInk) / float64(n), float64(nBlue) / float64(n)
}

// TestChromiumRendersCharts renders the demo report in headless Chromium,
// takes screenshots of a reference chart and of a worker panel and checks
// that they show drawings, and prints the report to an A4 PDF. Set
// VEER_SCREENSHOT_DIR to keep the pictures.
func TestChromiumRendersCharts(t *testing.T) {
	exe := needChromium(t)
	dir := t.TempDir()
	var buf bytes.Buffer
	if err := Render(&buf, demoData(t)); err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(dir, "report.html")
	if err := os.WriteFile(file, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(exe),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.UserDataDir(filepath.Join(dir, "profile")),
		chromedp.WindowSize(900, 1200),
	}
	actx, cancelA := chromedp.NewExecAllocator(context.Background(), opts...)
	defer cancelA()
	ctx, cancel := chromedp.NewContext(actx)
	defer cancel()
	ctx, cancelT := context.WithTimeout(ctx, 60*time.Second)
	defer cancelT()

	start := time.Now()
	if err := chromedp.Do(ctx,
		chromedp.Navigate("file://"+file),
		chromedp.WaitVisible(chromedp.CSS(`svg.ref`)),
	); err != nil {
		t.Fatalf("Chromium could not open the report: %v", err)
	}
	t.Logf("opened after %v", time.Since(start))
	svgCount, err := chromedp.Run(ctx, chromedp.Evaluate[int](`document.querySelectorAll("svg").length`))
	if err != nil {
		t.Fatal(err)
	}
	refShot, err := chromedp.Run(ctx, chromedp.Screenshot(chromedp.CSS(`svg.ref`)))
	if err != nil {
		t.Fatal(err)
	}
	panelShot, err := chromedp.Run(ctx, chromedp.Screenshot(chromedp.CSS(`div.panel`)))
	if err != nil {
		t.Fatal(err)
	}
	pageShot, err := chromedp.Run(ctx, chromedp.CaptureScreenshot())
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshots after %v", time.Since(start))
	pdf, err := chromedp.Run(ctx, chromedp.PrintToPDF(chromedp.PDFPaper(chromedp.PaperA4), chromedp.PDFPreferCSSPageSize(), chromedp.PDFPrintBackground(), chromedp.PDFPageRanges("1-4")))
	if err != nil {
		t.Fatalf("printing to PDF: %v", err)
	}
	t.Logf("printed after %v", time.Since(start))
	if want := len(svgRE.FindAllString(buf.String(), -1)); svgCount != want {
		t.Errorf("Chromium sees %d SVG elements, the HTML has %d", svgCount, want)
	}
	for _, c := range []struct {
		name          string
		png           []byte
		minInk, minBl float64
	}{
		{"reference chart", refShot, 0.10, 0.05},
		{"worker panel", panelShot, 0.05, 0.01},
		{"first page", pageShot, 0.02, 0.001},
	} {
		img, err := png.Decode(bytes.NewReader(c.png))
		if err != nil {
			t.Fatalf("%s: screenshot is not a PNG: %v", c.name, err)
		}
		ink, blue := inkShare(img)
		t.Logf("%s: %dx%d px, %.1f%% ink, %.1f%% blue", c.name, img.Bounds().Dx(), img.Bounds().Dy(), 100*ink, 100*blue)
		if img.Bounds().Dx() < 300 || img.Bounds().Dy() < 100 {
			t.Errorf("%s: screenshot only %v; the chart has no size", c.name, img.Bounds())
		}
		if ink < c.minInk || blue < c.minBl {
			t.Errorf("%s looks blank: %.1f%% non-white pixels (want ≥ %.0f%%), %.2f%% blue (want ≥ %.1f%%)",
				c.name, 100*ink, 100*c.minInk, 100*blue, 100*c.minBl)
		}
	}
	// Each marker starts on a new A4 page, so the first four pages exist.
	pages := len(regexp.MustCompile(`/Type\s*/Page[^s]`).FindAll(pdf, -1))
	if !bytes.HasPrefix(pdf, []byte("%PDF")) || pages != 4 {
		t.Errorf("printing pages 1-4 to PDF gave %d bytes and %d pages", len(pdf), pages)
	}
	if keep := os.Getenv("VEER_SCREENSHOT_DIR"); keep != "" {
		for name, b := range map[string][]byte{"reference.png": refShot, "panel.png": panelShot, "page.png": pageShot, "report.pdf": pdf, "report.html": buf.Bytes()} {
			if err := os.WriteFile(filepath.Join(keep, name), b, 0o644); err != nil {
				t.Error(err)
			}
		}
	}
}

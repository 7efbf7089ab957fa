package report

import (
	"bytes"
	"context"
	"fmt"
	"image"
	"image/png"
	"net/url"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"
	"time"
)

// These tests open the design-review page in a real browser, headless Chromium, where it is
// installed (CI's .ci/run installs Debian's chromium package); elsewhere, and with -short, they
// skip.

// chromiumFlags go with every run: headless, no sandbox (CI runs as root), no GPU, none of the
// browser's own traffic (background fetches, component updates, sync), no first-run set-up,
// /tmp instead of a small /dev/shm; and every host name fails to resolve, so nothing leaves the
// machine even if something were asked for.
var chromiumFlags = []string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
	"--disable-component-update", "--disable-sync", "--no-first-run", "--disable-dev-shm-usage",
	"--host-resolver-rules=MAP * ~NOTFOUND", "--hide-scrollbars"}

// browserTimeout bounds one browser run: a cold start and a page of a few megabytes take a few
// seconds; a minute means the browser hangs.
const browserTimeout = 90 * time.Second

// chromium returns the browser's path, or skips the test.
func chromium(t *testing.T) string {
	t.Helper()
	if testing.Short() {
		t.Skip("renders the page in a browser: skipped with -short")
	}
	path, err := exec.LookPath("chromium")
	if err != nil {
		t.Skip("chromium is not installed (apt-get install chromium)")
	}
	return path
}

// runChromium runs the browser once with a fresh profile and returns its standard output.
func runChromium(t *testing.T, bin string, args ...string) []byte {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), browserTimeout)
	defer cancel()
	all := append(slices.Clone(chromiumFlags), "--user-data-dir="+t.TempDir())
	cmd := exec.CommandContext(ctx, bin, append(all, args...)...)
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	cmd.WaitDelay = 10 * time.Second
	if err := cmd.Run(); err != nil {
		msg := stderr.String()
		if len(msg) > 2000 {
			msg = msg[len(msg)-2000:]
		}
		t.Fatalf("chromium %s: %v\n%s", strings.Join(args, " "), err, msg)
	}
	return stdout.Bytes()
}

// writePage writes the fixture's page to a file and returns its file: URL.
func writePage(t *testing.T, f *fixture) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "report.html")
	if err := os.WriteFile(path, f.page, 0o644); err != nil {
		t.Fatal(err)
	}
	return (&url.URL{Scheme: "file", Path: path}).String()
}

// keyedValues lists the keyed values of a page in document order, as "key=text".
func keyedValues(t *testing.T, page []byte) []string {
	var out []string
	for _, n := range parsePage(t, page).find(func(m *node) bool { _, ok := m.attr["data-key"]; return ok }) {
		out = append(out, n.attr["data-key"]+"="+n.textContent())
	}
	return out
}

// TestBrowserDOM: the document the browser builds from the review page has every section, every
// picture and exactly the keyed values we wrote, in order and with the same text, so no markup
// was misread; and it holds no script.
func TestBrowserDOM(t *testing.T) {
	bin := chromium(t)
	f := reviewFixture(t) // before Parallel: the fixture cache is not shared across goroutines
	t.Parallel()
	dom := runChromium(t, bin, "--dump-dom", writePage(t, f))
	root := parsePage(t, dom)
	var sections []string
	for _, s := range root.find(func(m *node) bool { return m.tag == "section" }) {
		sections = append(sections, s.attr["id"])
		if len(s.find(func(m *node) bool { return m.tag == "h2" })) != 1 {
			t.Errorf("section %q has no heading in the browser's document", s.attr["id"])
		}
	}
	if want := []string{"warnings", "scenario", "numbers", "pictures", "caution", "method", "reproduce"}; !slices.Equal(sections, want) {
		t.Errorf("browser's sections %q, want %q", sections, want)
	}
	if n := len(root.find(func(m *node) bool { return m.tag == "script" })); n != 0 {
		t.Errorf("%d scripts in the browser's document", n)
	}
	imgs := root.find(func(m *node) bool {
		return m.tag == "img" && strings.HasPrefix(m.attr["src"], "data:image/png;base64,")
	})
	if len(imgs) != len(f.in.Figures) {
		t.Errorf("%d inline images in the browser's document, want %d", len(imgs), len(f.in.Figures))
	}
	got, want := keyedValues(t, dom), keyedValues(t, f.page)
	if !slices.Equal(got, want) {
		for i := range min(len(got), len(want)) {
			if got[i] != want[i] {
				t.Errorf("keyed value %d: browser has %q, page %q", i, got[i], want[i])
				break
			}
		}
		t.Errorf("browser's document has %d keyed values, the page %d", len(got), len(want))
	}
}

// TestBrowserScreenshot: the page renders to something a reviewer can read, not blank, with its
// pictures shown: the policy lets the inline images through and the browser decodes them. The
// empty contraction, which has no pictures, is the control that the picture check can fail.
func TestBrowserScreenshot(t *testing.T) {
	bin := chromium(t)
	cases := []struct {
		name     string
		f        *fixture
		pictures bool
	}{{"review", reviewFixture(t), true}, {"plain", plainFixture(t), false}}
	t.Parallel()
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			const width, height = 1280, 7000 // a laptop's width, tall enough to reach the pictures
			shot := filepath.Join(t.TempDir(), "page.png")
			runChromium(t, bin, "--screenshot="+shot, fmt.Sprintf("--window-size=%d,%d", width, height), writePage(t, tc.f))
			r, err := os.Open(shot)
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			img, err := png.Decode(r)
			if err != nil {
				t.Fatal(err)
			}
			if b := img.Bounds(); b.Dx() != width || b.Dy() != height {
				t.Fatalf("screenshot %v, want %d × %d", b.Size(), width, height)
			}
			inked, _ := tones(img, 0, height)
			top, _ := tones(img, 0, 800)
			_, colours := tones(img, 0, height)
			t.Logf("%.1f %% not white, top 800 px %.1f %%; %d distinct vivid colours", 100*inked, 100*top, colours)
			// Thresholds, set well below what the page as written measures (review: about 10 %
			// not white, 25 % of the first screen, over three thousand vivid colours; plain: 5 %,
			// 7 %, about ten), so that a change of layout passes and a blank page does not. The
			// page's own style has a handful of strong colours (accent, warning, alert, probe
			// marks) and their anti-aliased edges; the colour maps of the pictures bring
			// thousands.
			const (
				minInked   = 0.02 // of the whole shot: text, rules, tables
				minTop     = 0.04 // of the first screen: masthead, warnings, headline numbers
				picColours = 300
			)
			if inked < minInked {
				t.Errorf("%.1f %% of the screenshot is not white, want at least %.0f %%: the page looks blank", 100*inked, 100*minInked)
			}
			if top < minTop {
				t.Errorf("%.1f %% of the first screen is not white, want at least %.0f %%", 100*top, 100*minTop)
			}
			if shown := colours >= picColours; shown != tc.pictures {
				t.Errorf("%d distinct vivid colours: pictures shown %v, want %v (threshold %d)", colours, shown, tc.pictures, picColours)
			}
		})
	}
}

// tones returns, over rows [y0, y1), the fraction of pixels that are not white (a channel below
// 240 of 255) and the number of distinct vivid colours (channels spread by more than 60 of 255).
func tones(img image.Image, y0, y1 int) (inked float64, vivid int) {
	b := img.Bounds()
	seen := map[[3]uint32]bool{}
	var n, ink int
	for y := max(y0, b.Min.Y); y < min(y1, b.Max.Y); y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, _ := img.At(x, y).RGBA()
			r, g, bl = r>>8, g>>8, bl>>8
			n++
			if r < 240 || g < 240 || bl < 240 {
				ink++
			}
			if max(r, g, bl)-min(r, g, bl) > 60 {
				seen[[3]uint32{r, g, bl}] = true
			}
		}
	}
	if n == 0 {
		return 0, 0
	}
	return float64(ink) / float64(n), len(seen)
}

// pdfPage matches a page object of a PDF (ISO 32000-1, 7.7.3.3: /Type /Page), not the /Pages
// tree nodes.
var pdfPage = regexp.MustCompile(`/Type\s*/Page\b`)

// TestBrowserPrint: printed, every section after the warnings starts a new page (the print
// style sheet), so the page prints to at least one sheet per section.
func TestBrowserPrint(t *testing.T) {
	bin := chromium(t)
	f := reviewFixture(t) // before Parallel: the fixture cache is not shared across goroutines
	t.Parallel()
	pdf := filepath.Join(t.TempDir(), "page.pdf")
	runChromium(t, bin, "--no-pdf-header-footer", "--print-to-pdf="+pdf, writePage(t, f))
	data, err := os.ReadFile(pdf)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(data, []byte("%PDF-")) {
		t.Fatalf("%s is not a PDF", pdf)
	}
	pages := len(pdfPage.FindAll(data, -1))
	// Masthead and warnings, then scenario, key numbers, pictures, caution, method, reproduce:
	// six breaks, seven pages at the least.
	const minPages = 7
	t.Logf("printed to %d pages", pages)
	if pages < minPages {
		t.Errorf("printed to %d pages, want at least %d (one per section)", pages, minPages)
	}
}

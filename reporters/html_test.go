package reporters

import (
	"context"
	"image"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"sparsegate/harness/atomicfile"
)

// chartSections returns the chart sections of a page (source or DOM).
func chartSections(t *testing.T, page string) []string {
	t.Helper()
	var out []string
	for _, m := range regexp.MustCompile(`(?s)<section class="chart"[^>]*>(.*?)</section>`).FindAllStringSubmatch(page, -1) {
		out = append(out, m[1])
	}
	return out
}

func TestHTMLStructure(t *testing.T) {
	page := string(render(t, HTML{}, failingVerdict()))
	if !strings.Contains(page, `<table id="verdict">`) {
		t.Error("no verdict table")
	}
	sections := chartSections(t, page)
	// Six probes with gated metrics, one sparsity probe, one sensitivity
	// group.
	if len(sections) != 8 {
		t.Errorf("%d chart sections, want 8", len(sections))
	}
	for i, s := range sections {
		if n := strings.Count(s, "<svg"); n != 1 {
			t.Errorf("chart section %d holds %d <svg>, want 1", i, n)
		}
	}
	if n := strings.Count(page, "<svg"); n != len(sections) {
		t.Errorf("%d <svg> in the page, %d in chart sections", n, len(sections))
	}
	if !strings.Contains(page, "@media print") {
		t.Error("no print rules")
	}
	if !strings.Contains(page, Caution) {
		t.Error("no caution line")
	}
	// Red bars for the two failing metrics, and only for them.
	if n := strings.Count(page, `fill="`+colWorse+`"`); n != 2 {
		t.Errorf("%d red bars, want 2 (accuracy, exact_match)", n)
	}
	if n := strings.Count(page, `id="sparsity-`); n != 1 {
		t.Errorf("%d sparsity charts, want 1", n)
	}
	// Four layers, two components: eight bars with their own tooltips.
	if n := strings.Count(page, "<title>layer "); n != 16 {
		t.Errorf("%d per-layer bars, want 16 (sparsity 8, sensitivity 8)", n)
	}
	if pass := string(render(t, HTML{}, passingVerdict())); strings.Contains(pass, `id="sensitivity-`) {
		t.Error("a sensitivity chart without sensitivity rows")
	}
}

func TestHTMLSelfContained(t *testing.T) {
	page := string(render(t, HTML{}, failingVerdict()))
	for _, re := range []string{
		`<script`, `<link`, `<img`, `<iframe`, `<object`, `<embed`, `@import`, `url\(`,
		`\ssrc=`, `\shref=`, `https?://[^"]*"`,
	} {
		// The one address allowed is the SVG namespace name, which is an
		// identifier and is never fetched.
		found := regexp.MustCompile(re).FindAllString(strings.ReplaceAll(page, `xmlns="http://www.w3.org/2000/svg"`, ""), -1)
		if len(found) > 0 {
			t.Errorf("page refers outside itself: %q", found)
		}
	}
}

func TestHTMLEscapesText(t *testing.T) {
	v := hostileVerdict()
	v.Probes[0].Name = `<script>alert(1)</script>"onx='y'`
	page := string(render(t, HTML{}, v))
	if strings.Contains(page, "<script") || strings.Contains(page, `"onx`) {
		t.Error("markup from a probe name reached the page")
	}
	if !strings.Contains(page, "&lt;script&gt;alert(1)&lt;/script&gt;&#34;onx=&#39;y&#39;") {
		t.Error("probe name not shown escaped")
	}
	for _, b := range []byte(page) {
		if b < 0x20 && b != '\n' && b != '\t' {
			t.Fatalf("raw control byte %#x in the page", b)
		}
	}
}

// TestHTMLInChromium loads the page in headless Chromium (Debian package
// chromium), checks the DOM it builds and takes a screenshot at 1280 px.
func TestHTMLInChromium(t *testing.T) {
	bin, err := exec.LookPath("chromium")
	if err != nil {
		missingReference(t, "chromium not found; install it with: apt-get install chromium")
		return
	}
	dir := t.TempDir()
	page := filepath.Join(dir, "report.html")
	if err := WriteFile(page, HTML{}, failingVerdict()); err != nil {
		t.Fatal(err)
	}
	run := func(args ...string) []byte {
		ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
		defer cancel()
		base := []string{"--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
			"--disable-background-networking", "--disable-component-update", "--disable-sync",
			"--user-data-dir=" + filepath.Join(dir, "profile")}
		cmd := exec.CommandContext(ctx, bin, append(append(base, args...), "file://"+page)...)
		var stderr strings.Builder
		cmd.Stderr = &stderr
		out, err := cmd.Output()
		if err != nil {
			t.Fatalf("chromium %s: %v\n%s", strings.Join(args, " "), err, stderr.String())
		}
		return out
	}

	dom := string(run("--dump-dom"))
	if !strings.Contains(dom, `<table id="verdict">`) {
		t.Error("the DOM has no verdict table")
	}
	sections := chartSections(t, dom)
	if want := len(chartSections(t, string(render(t, HTML{}, failingVerdict())))); len(sections) != want {
		t.Errorf("DOM has %d chart sections, the page %d", len(sections), want)
	}
	for i, s := range sections {
		if n := strings.Count(s, "<svg"); n != 1 {
			t.Errorf("DOM chart section %d holds %d <svg>, want 1", i, n)
		}
	}

	shot := filepath.Join(dir, "report.png")
	run("--screenshot="+shot, "--window-size=1280,2000")
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v", err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("screenshot is not a PNG: %v", err)
	}
	if b := img.Bounds(); b.Dx() != 1280 {
		t.Errorf("screenshot %v, want 1280 px wide", b)
	}
	if flat(img) {
		t.Error("screenshot is one flat colour: nothing was drawn")
	}
	if art := os.Getenv("SPARSEGATE_ARTIFACTS"); art != "" {
		data, err := os.ReadFile(shot)
		if err != nil {
			t.Fatal(err)
		}
		dst := filepath.Join(art, "report-screenshot.png")
		if err := os.MkdirAll(art, 0o755); err != nil {
			t.Fatal(err)
		}
		if err := atomicfile.WriteFile(dst, data); err != nil {
			t.Fatal(err)
		}
		t.Logf("screenshot: %s", dst)
	}
}

// flat reports whether every pixel of img has the colour of the first.
func flat(img image.Image) bool {
	b := img.Bounds()
	r0, g0, b0, a0 := img.At(b.Min.X, b.Min.Y).RGBA()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if r, g, bb, a := img.At(x, y).RGBA(); r != r0 || g != g0 || bb != b0 || a != a0 {
				return false
			}
		}
	}
	return true
}

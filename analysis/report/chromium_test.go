package report

import (
	"bytes"
	"context"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"
)

// chromiumPath finds Debian's chromium; under CI a missing browser fails
// the test (it is installed by `make deps`), elsewhere it skips.
func chromiumPath(t *testing.T) string {
	t.Helper()
	for _, name := range []string{"chromium", "chromium-browser"} {
		if p, err := exec.LookPath(name); err == nil {
			return p
		}
	}
	if os.Getenv("CI") != "" {
		t.Fatal("chromium is required under CI to check the HTML report (Debian package chromium; make deps installs it)")
	}
	t.Skip("chromium not installed (Debian package chromium)")
	return ""
}

// runChromium runs headless Chromium with args, giving up after a minute.
func runChromium(t *testing.T, bin string, args ...string) []byte {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	base := []string{"--headless", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
		"--no-first-run", "--disable-extensions", "--hide-scrollbars",
		"--user-data-dir=" + t.TempDir()}
	cmd := exec.CommandContext(ctx, bin, append(base, args...)...)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("chromium %v: %v\n%s", args, err, stderr.String())
	}
	return out
}

// probe is appended to a copy of the page for the test only: after layout
// it writes the rendered size of every SVG and table into the DOM, so that
// --dump-dom shows whether they were laid out with a size, not only parsed.
const probe = `<script>
window.addEventListener('load', function () {
  var out = [];
  document.querySelectorAll('svg').forEach(function (s) { var r = s.getBoundingClientRect(); out.push('svg ' + Math.round(r.width) + 'x' + Math.round(r.height)); });
  document.querySelectorAll('table').forEach(function (s) { var r = s.getBoundingClientRect(); out.push('table ' + Math.round(r.width) + 'x' + Math.round(r.height) + ' rows ' + s.rows.length); });
  var p = document.createElement('pre'); p.id = 'probe'; p.textContent = out.join('\n'); document.body.appendChild(p);
});
</script>`

// checkInChromium renders the page at htmlPath in headless Chromium: the DOM
// after load must hold at least minSVG figures and minTables tables laid out
// with a size, and a screenshot must show more than blank paper. It
// returns the screenshot path.
func checkInChromium(t *testing.T, htmlPath string, minSVG, minTables int) string {
	t.Helper()
	bin := chromiumPath(t)
	page, err := os.ReadFile(htmlPath)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	probed := filepath.Join(dir, "probed.html")
	os.WriteFile(probed, bytes.Replace(page, []byte("</body>"), []byte(probe+"</body>"), 1), 0o644)
	dom := string(runChromium(t, bin, "--virtual-time-budget=5000", "--dump-dom", "file://"+probed))
	m := regexp.MustCompile(`(?s)<pre id="probe">(.*?)</pre>`).FindStringSubmatch(dom)
	if m == nil {
		t.Fatalf("the probe did not run; DOM starts %.300q", dom)
	}
	svgs, tables := 0, 0
	for _, line := range strings.Split(m[1], "\n") {
		f := strings.Fields(line)
		if len(f) < 2 {
			continue
		}
		wh := strings.Split(f[1], "x")
		w, _ := strconv.Atoi(wh[0])
		h, _ := strconv.Atoi(wh[len(wh)-1])
		switch f[0] {
		case "svg":
			if w >= 100 && h >= 50 {
				svgs++
			}
		case "table":
			if rows, _ := strconv.Atoi(f[len(f)-1]); rows >= 2 && w >= 40 && h >= 20 {
				tables++
			}
		}
	}
	if svgs < minSVG || tables < minTables {
		t.Errorf("rendered %d figures and %d tables with content, want at least %d and %d; probe:\n%s", svgs, tables, minSVG, minTables, m[1])
	}
	shot := filepath.Join(dir, "report.png")
	runChromium(t, bin, "--screenshot="+shot, "--window-size=1280,2400", "file://"+htmlPath)
	f, err := os.Open(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v", err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("screenshot: %v", err)
	}
	// Count pixels that are not near-white: text, table rules, lines.
	inked := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y += 2 {
		for x := b.Min.X; x < b.Max.X; x += 2 {
			r, g, bb, _ := img.At(x, y).RGBA()
			if r < 0xd000 || g < 0xd000 || bb < 0xd000 {
				inked++
			}
		}
	}
	if frac := float64(inked) / float64(b.Dx()*b.Dy()/4); frac < 0.01 {
		t.Errorf("screenshot is almost blank: %.4f of pixels inked", frac)
	}
	if keep := os.Getenv("MUARC_REPORT_SHOT"); keep != "" {
		b, _ := os.ReadFile(shot)
		os.WriteFile(keep, b, 0o644)
	}
	return shot
}

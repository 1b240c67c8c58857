package web_test

import (
	"context"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"

	"handoff"
	"handoff/api"
	"handoff/round"
	"handoff/sim"
	"handoff/store"
)

// Hostile item texts: shown as text, they must run nothing.
const (
	hostileScript = `<script>window.__pwned = "script"</script> read me as text`
	hostileImg    = `<img src=x onerror="window.__pwned='img'"> also text`
)

// chromium finds the browser, or skips the test (fails it when
// HANDOFF_REQUIRE_BROWSER=1, as `make test` sets).
func chromium(t *testing.T) string {
	t.Helper()
	for _, p := range []string{os.Getenv("HANDOFF_CHROMIUM"), "/usr/bin/chromium", "chromium", "chromium-browser"} {
		if p == "" {
			continue
		}
		if path, err := exec.LookPath(p); err == nil {
			return path
		}
	}
	if os.Getenv("HANDOFF_REQUIRE_BROWSER") == "1" {
		t.Fatal("chromium not found: run scripts/install-chromium.sh")
	}
	t.Skip("chromium not found (scripts/install-chromium.sh installs it)")
	return ""
}

// browser starts a headless Chromium with a fresh profile.
func browser(t *testing.T, width, height int) context.Context {
	t.Helper()
	path := chromium(t)
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(path),
		chromedp.Headless,
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.NoFirstRun,
		chromedp.NoDefaultBrowserCheck,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.Flag("disable-extensions", true),
		chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(width, height),
	}
	actx, cancel := chromedp.NewExecAllocator(context.Background(), opts...)
	t.Cleanup(cancel)
	ctx, cancel2 := chromedp.NewContext(actx)
	t.Cleanup(cancel2)
	// The first call starts the browser; it must not carry a timeout.
	if err := chromedp.Do(ctx); err != nil {
		t.Fatalf("starting chromium: %v", err)
	}
	tctx, cancel3 := context.WithTimeout(ctx, 90*time.Second)
	t.Cleanup(cancel3)
	return tctx
}

// artefact returns the path for a screenshot: testdata/artefacts/ at the
// repository root (git-ignored).
func artefact(t *testing.T, name string) string {
	t.Helper()
	dir := filepath.Join("..", "testdata", "artefacts")
	if err := os.MkdirAll(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	p, _ := filepath.Abs(filepath.Join(dir, name))
	return p
}

func screenshot(t *testing.T, ctx context.Context, name string) {
	t.Helper()
	shot(t, ctx, name, chromedp.FullScreenshot(100))
}

// shot saves what a screenshot action returns.
func shot(t *testing.T, ctx context.Context, name string, a chromedp.Action[[]byte]) {
	t.Helper()
	buf, err := chromedp.Run(ctx, a)
	if err != nil {
		t.Fatalf("screenshot %s: %v", name, err)
	}
	p := artefact(t, name)
	if err := os.WriteFile(p, buf, 0o644); err != nil {
		t.Fatal(err)
	}
	t.Logf("screenshot: %s", p)
}

type project struct {
	st     *store.Store
	sv     *api.Server
	ts     *httptest.Server
	tokens map[string]string
}

func serve(t *testing.T, st *store.Store, cfg api.Config, people map[string]bool) *project {
	t.Helper()
	p := &project{st: st, tokens: map[string]string{}}
	for id, admin := range people {
		tok, err := api.AddPerson(st, id, admin, "test")
		if err != nil {
			t.Fatal(err)
		}
		p.tokens[id] = tok
	}
	cfg.Logf = t.Logf
	sv, err := api.New(st, cfg)
	if err != nil {
		t.Fatal(err)
	}
	p.sv = sv
	p.ts = httptest.NewServer(sv.Handler())
	t.Cleanup(func() { p.ts.Close(); sv.Close() })
	return p
}

var codebook = handoff.Codebook{
	Name: "river-notes", Question: "What is this note mainly about?", Instructions: "Read the whole note. Pick the topic most of it is about; if two fit equally, pick the first that applies.",
	Classes: []handoff.Class{
		{Key: "water", Name: "Water quality", Description: "Pollution, smell, colour, fish deaths."},
		{Key: "banks", Name: "Banks and paths", Description: "Erosion, fallen trees, closed paths."},
		{Key: "other", Name: "Something else", Description: "Anything not about the river itself."},
	},
}

// labelProject has two hostile items first, then plain notes, and four
// gold items for the training (2) and the quiz (2).
func labelProject(t *testing.T) *store.Store {
	t.Helper()
	st, err := store.Create(t.TempDir(), codebook, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	items := []handoff.Item{
		{ID: "h1", Kind: handoff.KindText, Text: hostileScript},
		{ID: "h2", Kind: handoff.KindText, Text: hostileImg},
	}
	notes := []string{"The water smelled of diesel near the weir.", "A tree fell across the towpath.", "Our volunteers met at the café.",
		"Dead fish below the outfall.", "The bank slipped after the rain.", "Foam on the surface by the mill.", "New bins at the car park.",
		"Brown water after the storm.", "The footbridge is closed.", "Litter picked by the scouts.", "Algae bloom in the oxbow.", "Signs repainted."}
	for i, n := range notes {
		items = append(items, handoff.Item{ID: fmt.Sprintf("n%02d", i), Kind: handoff.KindText, Text: n})
	}
	gold := []handoff.Gold{{Item: "g1", Class: "water"}, {Item: "g2", Class: "banks"}, {Item: "g3", Class: "other"}, {Item: "g4", Class: "water"}}
	for i, g := range []string{"Oil sheen on the river.", "The path is washed away.", "The committee meets on Tuesday.", "The stream runs grey."} {
		items = append(items, handoff.Item{ID: gold[i].Item, Kind: handoff.KindText, Text: g})
	}
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutGold(gold, "test"); err != nil {
		t.Fatal(err)
	}
	return st
}

// text returns the trimmed textContent of the first element matching sel
// ("" if none).
func text(ctx context.Context, sel string) string {
	s, _ := chromedp.Run(ctx, chromedp.Evaluate[string](fmt.Sprintf(`(document.querySelector(%q) || {}).textContent || ""`, sel)))
	return strings.TrimSpace(s)
}

// raw returns the exact textContent of the element with the given id.
func raw(t *testing.T, ctx context.Context, id string) string {
	t.Helper()
	s, err := chromedp.Run(ctx, chromedp.Evaluate[string](fmt.Sprintf(`document.getElementById(%q).textContent`, id)))
	if err != nil {
		t.Fatal(err)
	}
	return s
}

func eval[T any](t *testing.T, ctx context.Context, expr string) T {
	t.Helper()
	v, err := chromedp.Run(ctx, chromedp.Evaluate[T](expr))
	if err != nil {
		t.Fatalf("%s: %v", expr, err)
	}
	return v
}

// waitChange waits until the text of sel differs from old.
func waitChange(t *testing.T, ctx context.Context, sel, old string) string {
	t.Helper()
	deadline := time.Now().Add(10 * time.Second)
	for time.Now().Before(deadline) {
		if s := text(ctx, sel); s != old {
			return s
		}
		time.Sleep(30 * time.Millisecond)
	}
	t.Fatalf("%s stayed %q", sel, old)
	return ""
}

// signIn signs in on the sign-in page by keyboard alone.
func signIn(t *testing.T, ctx context.Context, base, token, page string) {
	t.Helper()
	if err := chromedp.Do(ctx, chromedp.Navigate(base+"/signin?next="+page)); err != nil {
		t.Fatal(err)
	}
	// The page puts the focus in the token field.
	until(t, ctx, `document.activeElement && document.activeElement.id === "token"`)
	if err := chromedp.Do(ctx, chromedp.KeyEvent(token), chromedp.KeyEvent(kb.Enter)); err != nil {
		t.Fatal(err)
	}
	until(t, ctx, `document.body && document.body.dataset.ready === "1"`)
}

// until waits (up to 15 s) for a JavaScript expression to be true.
func until(t *testing.T, ctx context.Context, expr string) {
	t.Helper()
	deadline := time.Now().Add(15 * time.Second)
	for time.Now().Before(deadline) {
		if ok, err := chromedp.Run(ctx, chromedp.Evaluate[bool]("!!("+expr+")")); err == nil && ok {
			return
		}
		time.Sleep(40 * time.Millisecond)
	}
	where, _ := chromedp.Run(ctx, chromedp.Evaluate[string](`location.href + " " + (document.getElementById("status") || document.getElementById("signin-status") || {}).textContent`))
	t.Fatalf("waited 15 s for %s (page: %s)", expr, where)
}

// TestLabellingByKeyboard signs in, goes through the training and the quiz,
// then labels ten items with number keys only, watching progress move; the
// hostile items show as text and run nothing.
func TestLabellingByKeyboard(t *testing.T) {
	st := labelProject(t)
	p := serve(t, st, api.Config{Practice: 2, Check: 2, PassMark: 1}, map[string]bool{"kim": false})
	ctx := browser(t, 1200, 900)
	signIn(t, ctx, p.ts.URL, p.tokens["kim"], "/label")

	// Training: g1 (water = key 1), then feedback, Enter to continue; g2
	// (banks = 2). Quiz: g3 (other = 3), g4 (water = 1).
	if m := text(ctx, "#mode"); !strings.Contains(m, "Practice 1 of 2") {
		t.Fatalf("mode %q, want the first practice item", m)
	}
	screenshot(t, ctx, "label-training.png")
	press := func(keys string) {
		t.Helper()
		if err := chromedp.Do(ctx, chromedp.KeyEvent(keys)); err != nil {
			t.Fatal(err)
		}
	}
	press("2") // wrong on purpose: the feedback names the expected answer
	if err := chromedp.Do(ctx, chromedp.WaitVisible(chromedp.CSS("#continue"))); err != nil {
		t.Fatal(err)
	}
	if fb := text(ctx, "#feedback"); !strings.Contains(fb, "Water quality") {
		t.Errorf("training feedback %q does not name the expected answer", fb)
	}
	screenshot(t, ctx, "label-training-feedback.png")
	press(kb.Enter)
	waitChange(t, ctx, "#mode", "")
	if it := text(ctx, "#item-id"); it != "Item g2" {
		t.Fatalf("after the first practice item: %q", it)
	}
	press("2")
	chromedp.Do(ctx, chromedp.WaitVisible(chromedp.CSS("#continue")))
	press(kb.Enter)
	waitChange(t, ctx, "#item-id", "Item g2")
	if m := text(ctx, "#mode"); !strings.Contains(m, "Check 1 of 2") {
		t.Fatalf("mode %q, want the quiz", m)
	}
	press("3")
	waitChange(t, ctx, "#item-id", "Item g3")
	if fb := text(ctx, "#feedback"); fb != "" {
		t.Errorf("the quiz showed feedback: %q", fb)
	}
	press("1")
	waitChange(t, ctx, "#item-id", "Item g4")

	// Real work: ten items by number keys.
	first := text(ctx, "#item-id")
	if first != "Item h1" {
		t.Fatalf("first work item %q, want h1", first)
	}
	if shown := raw(t, ctx, "item-text"); shown != hostileScript {
		t.Errorf("hostile text shown as %q", shown)
	}
	screenshot(t, ctx, "label-hostile-script.png")
	prev := first
	for i := 0; i < 10; i++ {
		before := text(ctx, "#p-labelled")
		press(fmt.Sprint(1 + i%3))
		prev = waitChange(t, ctx, "#item-id", prev)
		after := waitChange(t, ctx, "#p-labelled", before)
		if after != fmt.Sprint(i+1) {
			t.Errorf("after %d labels progress says %q", i+1, after)
		}
		if i == 0 {
			if s := raw(t, ctx, "item-text"); s != hostileImg {
				t.Errorf("hostile image text shown as %q", s)
			}
			screenshot(t, ctx, "label-hostile-img.png")
		}
	}
	pwned := eval[string](t, ctx, `window.__pwned === undefined ? "" : String(window.__pwned)`)
	children := eval[int](t, ctx, `document.querySelectorAll("#item-text *").length`)
	if pwned != "" || children != 0 {
		t.Errorf("hostile item ran or made elements: pwned=%v, elements in the text=%d", pwned, children)
	}
	labels, err := st.LabelsBy("kim")
	if err != nil || len(labels) != 10 {
		t.Fatalf("kim has %d labels (%v), want 10", len(labels), err)
	}
	screenshot(t, ctx, "label-after-ten.png")

	// Skip and unsure by keyboard.
	cur := text(ctx, "#item-id")
	press("s")
	cur = waitChange(t, ctx, "#item-id", cur)
	press("u")
	waitChange(t, ctx, "#item-id", cur)
	if n, _ := st.UnsureCounts(); len(n) != 1 {
		t.Errorf("unsure marks %v", n)
	}
}

// TestPhoneWidth checks that the labelling page fits a phone screen: no
// sideways scrolling, every answer button visible.
func TestPhoneWidth(t *testing.T) {
	st := labelProject(t)
	p := serve(t, st, api.Config{Practice: -1, Check: -1}, map[string]bool{"ali": false})
	ctx := browser(t, 1000, 900)
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(390, 844, chromedp.EmulateMobile)); err != nil {
		t.Fatal(err)
	}
	signIn(t, ctx, p.ts.URL, p.tokens["ali"], "/label")
	overflow := eval[bool](t, ctx, `document.documentElement.scrollWidth > window.innerWidth + 1`)
	buttons := eval[int](t, ctx, `[...document.querySelectorAll("#answers button")].filter(b => b.getBoundingClientRect().right <= window.innerWidth).length`)
	if overflow || buttons != 3 {
		t.Errorf("phone width: sideways overflow %v, %d of 3 answer buttons inside the screen", overflow, buttons)
	}
	screenshot(t, ctx, "label-phone.png")
}

// TestBoard runs a round on the invented demo scenario and checks that the
// board shows the verdict and its report with plots.
func TestBoard(t *testing.T) {
	d, err := sim.NewDemo(sim.DemoConfig{Dir: filepath.Join(t.TempDir(), "images"), Text: sim.TextConfig{Reports: 150},
		Images: sim.ImageConfig{PerMagnification: 5}, Labelled: 0.5}, 5)
	if err != nil {
		t.Fatal(err)
	}
	st, err := store.Create(t.TempDir(), sim.TopicCodebook(), "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	items, labels, _ := d.Of(handoff.KindText)
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := round.Run(st, round.DefaultConfig(), "test"); err != nil {
		t.Fatal(err)
	}
	p := serve(t, st, api.Config{Practice: -1, Check: -1}, map[string]bool{"lead": true})
	ctx := browser(t, 1280, 1000)
	signIn(t, ctx, p.ts.URL, p.tokens["lead"], "/board")
	if err := chromedp.Do(ctx, chromedp.WaitVisible(chromedp.CSS("#decision")), chromedp.WaitVisible(chromedp.CSS("#report"))); err != nil {
		t.Fatal(err)
	}
	dec := text(ctx, "#decision")
	if !strings.HasPrefix(dec, "GO") && !strings.HasPrefix(dec, "NOT YET") {
		t.Errorf("decision %q", dec)
	}
	for _, sel := range []string{"#people table", "#agreement table", "#batch table", "#days svg"} {
		if n := eval[int](t, ctx, fmt.Sprintf(`document.querySelectorAll(%q).length`, sel)); n == 0 {
			t.Errorf("the board lacks %s", sel)
		}
	}
	// The framed report has loaded with its plots (inline SVG).
	until(t, ctx, `(() => { const d = document.getElementById("report").contentDocument; return d && d.querySelectorAll("svg").length >= 3; })()`)
	screenshot(t, ctx, "board.png")
	shot(t, ctx, "board-top.png", chromedp.CaptureScreenshot())
	// Keyboard: Tab from the top reaches the round button.
	if err := chromedp.Do(ctx, chromedp.Focus(chromedp.CSS("#run-round"))); err != nil {
		t.Fatal(err)
	}
	shot(t, ctx, "board-verdict.png", chromedp.Screenshot(chromedp.CSS("#verdict")))
	// The report itself, on its own page: plots are inline SVG.
	if err := chromedp.Do(ctx,
		chromedp.Navigate(p.ts.URL+"/api/v1/verdict/report"),
		chromedp.WaitReady(chromedp.CSS("body")),
	); err != nil {
		t.Fatal(err)
	}
	if plots := eval[int](t, ctx, `document.querySelectorAll("svg").length`); plots < 3 {
		t.Errorf("the verdict report has %d plots", plots)
	}
	screenshot(t, ctx, "verdict-report.png")
}

// TestImageItem shows an image item (served by item id) and zooms it with
// the keyboard.
func TestImageItem(t *testing.T) {
	dir := t.TempDir()
	img := image.NewRGBA(image.Rect(0, 0, 120, 80))
	for y := 0; y < 80; y++ {
		for x := 0; x < 120; x++ {
			img.Set(x, y, color.RGBA{uint8(2 * x), uint8(3 * y), 120, 255})
		}
	}
	path := filepath.Join(dir, "cells.png")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := png.Encode(f, img); err != nil {
		t.Fatal(err)
	}
	f.Close()
	st, err := store.Create(filepath.Join(dir, "p"), codebook, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	if _, err := st.PutItems([]handoff.Item{{ID: "cells", Kind: handoff.KindImage, Path: path}}, false, "test"); err != nil {
		t.Fatal(err)
	}
	p := serve(t, st, api.Config{Practice: -1, Check: -1}, map[string]bool{"sam": false})
	ctx := browser(t, 1000, 800)
	signIn(t, ctx, p.ts.URL, p.tokens["sam"], "/label")
	until(t, ctx, `document.getElementById("img").complete && document.getElementById("img").naturalWidth === 120`)
	if err := chromedp.Do(ctx, chromedp.KeyEvent("+"), chromedp.KeyEvent("+")); err != nil {
		t.Fatal(err)
	}
	until(t, ctx, `document.getElementById("img").style.width === "156.25%"`)
	if !eval[bool](t, ctx, `(() => { const b = document.getElementById("zoombox"); return b.scrollWidth > b.clientWidth; })()`) {
		t.Error("the zoomed image does not overflow its box (no scrolling to see it whole)")
	}
	screenshot(t, ctx, "label-image-zoomed.png")
	if err := chromedp.Do(ctx, chromedp.KeyEvent("0")); err != nil {
		t.Fatal(err)
	}
	until(t, ctx, `document.getElementById("img").style.width === "100%"`)
	if alt := text(ctx, "#item-id"); alt != "Item cells" {
		t.Errorf("item id %q", alt)
	}
}

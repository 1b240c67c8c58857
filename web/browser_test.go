package web_test

import (
	"context"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/cdproto/cdp"
	"github.com/chromedp/cdproto/emulation"
	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"

	"handoff"
	"handoff/api"
	"handoff/round"
	"handoff/sim"
	"handoff/store"
	"handoff/verdict"
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
// gold items for the practice (2) and the check (2).
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

// setViewport sizes the page as a desktop screen or, with phone, as a
// phone's touch screen, and reloads it.
func setViewport(t *testing.T, ctx context.Context, w, h int, phone bool) {
	t.Helper()
	var opts []chromedp.EmulateViewportOption
	if phone {
		opts = append(opts, chromedp.EmulateMobile, chromedp.EmulateTouch)
	}
	if err := chromedp.Do(ctx, chromedp.EmulateViewport(int64(w), int64(h), opts...)); err != nil {
		t.Fatal(err)
	}
}

// reload reloads the page and waits for it to be ready.
func reload(t *testing.T, ctx context.Context) {
	t.Helper()
	if err := chromedp.Do(ctx, chromedp.Reload()); err != nil {
		t.Fatal(err)
	}
	until(t, ctx, `document.body && document.body.dataset.ready === "1"`)
}

// outside lists the elements matching sel that are not wholly inside the
// viewport (or have no size), as "selector #i: rect".
func outside(t *testing.T, ctx context.Context, sel string) []string {
	t.Helper()
	return eval[[]string](t, ctx, fmt.Sprintf(`[...document.querySelectorAll(%q)].map((e, i) => {
		const r = e.getBoundingClientRect();
		const ok = r.width > 0 && r.height > 0 && r.left >= -0.5 && r.top >= -0.5 && r.right <= innerWidth + 0.5 && r.bottom <= innerHeight + 0.5;
		return ok ? "" : %q + " #" + i + ": " + [r.left, r.top, r.right, r.bottom].map(Math.round).join(",") + " in " + innerWidth + "×" + innerHeight;
	}).filter(Boolean)`, sel, sel))
}

// shown reports whether the element with the given id takes up room on the
// page (not hidden by the hidden attribute or by CSS).
func shown(t *testing.T, ctx context.Context, id string) bool {
	t.Helper()
	return eval[bool](t, ctx, fmt.Sprintf(`(() => { const e = document.getElementById(%q); return !!e && getComputedStyle(e).display !== "none" && e.getClientRects().length > 0; })()`, id))
}

func press(t *testing.T, ctx context.Context, keys string) {
	t.Helper()
	if err := chromedp.Do(ctx, chromedp.KeyEvent(keys)); err != nil {
		t.Fatal(err)
	}
}

// checkAnswers maps the check items of labelProject to the keys of their
// gold answers.
var checkAnswers = map[string]string{"Item g3": "3", "Item g4": "1"}

// TestLabellingByKeyboard signs in, goes through the practice and the check
// by keyboard alone, then labels ten items with number keys, changes the
// last answer (B), skips and marks one unsure, watching progress and the
// session goal move; the hostile items show as text and run nothing.
// Screenshots at 1366×768 and at a phone's 390×844.
func TestLabellingByKeyboard(t *testing.T) {
	st := labelProject(t)
	p := serve(t, st, api.Config{Practice: 2, Check: 2, PassMark: 1}, map[string]bool{"kim": false})
	ctx := browser(t, 1366, 768)
	setViewport(t, ctx, 1366, 768, false)
	signIn(t, ctx, p.ts.URL, p.tokens["kim"], "/label")

	// Practice: g1 (water = key 1), feedback, Enter; g2 (banks = 2). The
	// check: g3 (other = 3) and g4 (water = 1) in an order drawn for kim.
	if m := text(ctx, "#mode"); !strings.Contains(m, "Practice 1 of 2") {
		t.Fatalf("mode %q, want the first practice item", m)
	}
	if shown(t, ctx, "skip") || shown(t, ctx, "unsure") {
		t.Error("skip and not-sure are shown during the practice")
	}
	screenshot(t, ctx, "label-practice.png")
	press(t, ctx, "2") // wrong on purpose: the feedback names the expert's answer
	if err := chromedp.Do(ctx, chromedp.WaitVisible(chromedp.CSS("#continue"))); err != nil {
		t.Fatal(err)
	}
	if fb := text(ctx, "#feedback"); !strings.Contains(fb, "Water quality") {
		t.Errorf("practice feedback %q does not name the expected answer", fb)
	}
	screenshot(t, ctx, "label-practice-feedback.png")
	press(t, ctx, kb.Enter)
	waitChange(t, ctx, "#mode", "")
	if it := text(ctx, "#item-id"); it != "Item g2" {
		t.Fatalf("after the first practice item: %q", it)
	}
	press(t, ctx, "2")
	chromedp.Do(ctx, chromedp.WaitVisible(chromedp.CSS("#continue")))
	press(t, ctx, kb.Enter)
	first := waitChange(t, ctx, "#item-id", "Item g2")
	if m := text(ctx, "#mode"); !strings.Contains(m, "Check 1 of 2") {
		t.Fatalf("mode %q, want the check", m)
	}
	if shown(t, ctx, "skip") || shown(t, ctx, "unsure") {
		t.Error("skip and not-sure are shown during the check")
	}
	press(t, ctx, checkAnswers[first])
	second := waitChange(t, ctx, "#item-id", first)
	if fb := text(ctx, "#feedback"); fb != "" {
		t.Errorf("the check showed feedback: %q", fb)
	}
	press(t, ctx, checkAnswers[second])
	waitChange(t, ctx, "#item-id", second)

	// Real work: ten items by number keys.
	cur := text(ctx, "#item-id")
	if cur != "Item h1" {
		t.Fatalf("first work item %q, want h1", cur)
	}
	if !shown(t, ctx, "skip") || !shown(t, ctx, "unsure") {
		t.Error("skip and not-sure are not shown during real work")
	}
	if shown(t, ctx, "howto") {
		t.Error("the folded instructions show on a wide screen, beside the guide")
	}
	if shown := raw(t, ctx, "item-text"); shown != hostileScript {
		t.Errorf("hostile text shown as %q", shown)
	}
	if out := outside(t, ctx, "#answers button, #skip, #unsure, #item-text, #question"); len(out) > 0 {
		t.Errorf("at 1366×768, not on screen: %v", out)
	}
	screenshot(t, ctx, "label-text-1366.png")
	for i := 0; i < 10; i++ {
		before := text(ctx, "#p-labelled")
		press(t, ctx, fmt.Sprint(1+i%3))
		cur = waitChange(t, ctx, "#item-id", cur)
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
	if g := text(ctx, "#goal-text"); g != "10 of 20 this session" {
		t.Errorf("session goal says %q", g)
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

	// Change the last answer (the tenth, key 1 = water) to banks (key 2),
	// then carry on with the item that was shown.
	lastItem := labels[9].Item
	if !shown(t, ctx, "change") {
		t.Fatal("no way to change the last answer")
	}
	press(t, ctx, "b")
	waitChange(t, ctx, "#item-id", cur)
	if it := text(ctx, "#item-id"); it != "Item "+lastItem || !strings.Contains(text(ctx, "#mode"), "Changing your last answer") {
		t.Fatalf("changing: shows %q, mode %q", it, text(ctx, "#mode"))
	}
	screenshot(t, ctx, "label-change.png")
	press(t, ctx, "2")
	waitChange(t, ctx, "#item-id", "Item "+lastItem)
	if it := text(ctx, "#item-id"); it != cur {
		t.Errorf("after the change the page shows %q, want the item it showed before, %q", it, cur)
	}
	if got, _ := st.LabelsFor(lastItem); len(got) != 1 || got[0].Class != "banks" {
		t.Errorf("the changed label: %+v", got)
	}
	if s := text(ctx, "#status"); !strings.Contains(s, "is now Banks and paths") {
		t.Errorf("status after the change: %q", s)
	}
	// Esc keeps the answer.
	press(t, ctx, "b")
	waitChange(t, ctx, "#item-id", cur)
	press(t, ctx, kb.Escape)
	waitChange(t, ctx, "#item-id", "Item "+lastItem)

	// Skip and unsure by keyboard.
	press(t, ctx, "s")
	cur = waitChange(t, ctx, "#item-id", cur)
	press(t, ctx, "u")
	cur = waitChange(t, ctx, "#item-id", cur)
	if n, _ := st.UnsureCounts(); len(n) != 1 {
		t.Errorf("unsure marks %v", n)
	}
	screenshot(t, ctx, "label-after-ten.png")

	// The same page on a phone: no sideways scrolling, the instructions
	// above the item, the answers on screen, no key hints on a touch screen.
	setViewport(t, ctx, 390, 844, true)
	reload(t, ctx)
	if eval[bool](t, ctx, `document.documentElement.scrollWidth > window.innerWidth + 1`) {
		t.Error("the phone page scrolls sideways")
	}
	if out := outside(t, ctx, "#answers button, #skip, #unsure, #howto summary, #question, #item-text"); len(out) > 0 {
		t.Errorf("at 390×844, not on screen: %v", out)
	}
	if shown(t, ctx, "guide-title") {
		t.Error("the guide beside the item shows on a phone")
	}
	if n := eval[int](t, ctx, `[...document.querySelectorAll("kbd")].filter(k => k.getClientRects().length > 0).length`); n != 0 {
		t.Errorf("%d key hints shown on a touch screen", n)
	}
	screenshot(t, ctx, "label-text-390.png")
}

// TestFailedCheck fails the check twice: the page says how many answers
// must match and how many attempts are left (never "undefined", never the
// score), then that the team must grant another attempt.
func TestFailedCheck(t *testing.T) {
	st := labelProject(t)
	p := serve(t, st, api.Config{Practice: 1, Check: 3, PassMark: 1, CheckAttempts: 2}, map[string]bool{"lou": false})
	ctx := browser(t, 1366, 768)
	setViewport(t, ctx, 1366, 768, false)
	signIn(t, ctx, p.ts.URL, p.tokens["lou"], "/label")
	fail := func() {
		t.Helper()
		// Practice g1, then three check items answered "Something else" (3),
		// which matches at most one of them.
		press(t, ctx, "1")
		chromedp.Do(ctx, chromedp.WaitVisible(chromedp.CSS("#continue")))
		press(t, ctx, kb.Enter)
		for i := 0; i < 3; i++ {
			until(t, ctx, `document.getElementById("mode").textContent.startsWith("Check `+fmt.Sprint(i+1)+` of 3")`)
			press(t, ctx, "3")
		}
		until(t, ctx, `document.getElementById("mode").textContent === "Check not passed"`)
	}
	fail()
	fb := text(ctx, "#feedback")
	if !strings.Contains(fb, "At least 3 of the 3 check answers must match") || !strings.Contains(fb, "You have 1 attempt left") {
		t.Errorf("failed screen: %q", fb)
	}
	if strings.Contains(fb, "undefined") || strings.Contains(fb, "You matched") {
		t.Errorf("failed screen shows a score or undefined: %q", fb)
	}
	screenshot(t, ctx, "label-check-failed.png")
	press(t, ctx, kb.Enter) // "Practise again" has the focus
	until(t, ctx, `document.getElementById("mode").textContent.startsWith("Practice 1 of 1")`)
	fail()
	if fb := text(ctx, "#feedback"); !strings.Contains(fb, "used all your attempts") || !strings.Contains(fb, "project team") || strings.Contains(fb, "undefined") {
		t.Errorf("locked screen: %q", fb)
	}
	screenshot(t, ctx, "label-check-locked.png")
}

// writeImage writes a w×h PNG: a colour gradient with a dark cross at its
// centre.
func writeImage(t *testing.T, path string, w, h int) {
	t.Helper()
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			c := color.RGBA{uint8(255 * x / w), uint8(255 * y / h), 150, 255}
			if abs(x-w/2) < w/60 || abs(y-h/2) < h/60 {
				c = color.RGBA{20, 20, 40, 255}
			}
			img.Set(x, y, c)
		}
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := png.Encode(f, img); err != nil {
		t.Fatal(err)
	}
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

// TestImageItem shows image items (served by item id): at 1366×768 and at
// 390×844 the whole image and every answer are on screen without
// scrolling; zooming with the keyboard enlarges the image around the
// point at the centre of the box, and 0 fits it again.
func TestImageItem(t *testing.T) {
	dir := t.TempDir()
	st, err := store.Create(filepath.Join(dir, "p"), codebook, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	var items []handoff.Item
	for i, size := range [][2]int{{1600, 1200}, {600, 1400}, {120, 80}} {
		path := filepath.Join(dir, fmt.Sprintf("cells%d.png", i))
		writeImage(t, path, size[0], size[1])
		items = append(items, handoff.Item{ID: fmt.Sprintf("cells%d", i), Kind: handoff.KindImage, Path: path})
	}
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	p := serve(t, st, api.Config{Practice: -1, Check: -1, Redundancy: 1}, map[string]bool{"sam": false})
	ctx := browser(t, 1366, 768)
	setViewport(t, ctx, 1366, 768, false)
	signIn(t, ctx, p.ts.URL, p.tokens["sam"], "/label")
	fitted := `document.getElementById("img").dataset.fitted === "1"`
	until(t, ctx, fitted)
	// The image and its answers are inside the viewport at 1366×768.
	if out := outside(t, ctx, "#img, #zoombox, #answers button, #skip, #unsure, #question"); len(out) > 0 {
		t.Errorf("at 1366×768, not on screen: %v", out)
	}
	if eval[bool](t, ctx, `(() => { const m = document.getElementById("main"); return m.scrollHeight > m.clientHeight + 1; })()`) {
		t.Error("the labelling page scrolls at 1366×768 with an image")
	}
	if w := eval[float64](t, ctx, `document.getElementById("img").getBoundingClientRect().width`); w < 500 {
		t.Errorf("the 1600×1200 image is shown %.0f px wide at 1366×768: it should fill its box", w)
	}
	screenshot(t, ctx, "label-image-1366.png")

	// Zoom keeps the centre: the point of the image at the box's centre.
	centre := `(() => { const b = document.getElementById("zoombox"), i = document.getElementById("img");
		const br = b.getBoundingClientRect(), ir = i.getBoundingClientRect();
		return [(br.left + br.width / 2 - ir.left) / ir.width, (br.top + br.height / 2 - ir.top) / ir.height]; })()`
	press(t, ctx, "+")
	press(t, ctx, "+")
	until(t, ctx, `document.getElementById("img").dataset.zoom === "1.5625"`)
	c := eval[[]float64](t, ctx, centre)
	if abs(int(1000*(c[0]-0.5))) > 10 || abs(int(1000*(c[1]-0.5))) > 10 {
		t.Errorf("after zooming in, the box's centre is at %.3f, %.3f of the image; want 0.5, 0.5", c[0], c[1])
	}
	if !eval[bool](t, ctx, `(() => { const b = document.getElementById("zoombox"); return b.scrollWidth > b.clientWidth && b.scrollHeight > b.clientHeight; })()`) {
		t.Error("the zoomed image does not overflow its box (no scrolling to see it whole)")
	}
	// Look at another part, zoom again: that part stays at the centre.
	eval[bool](t, ctx, `(() => { const b = document.getElementById("zoombox"); b.scrollLeft = b.scrollWidth * 0.2; b.scrollTop = b.scrollHeight * 0.1; return true; })()`)
	before := eval[[]float64](t, ctx, centre)
	press(t, ctx, "+")
	until(t, ctx, `document.getElementById("img").dataset.zoom === "1.953125"`)
	after := eval[[]float64](t, ctx, centre)
	if abs(int(1000*(after[0]-before[0]))) > 10 || abs(int(1000*(after[1]-before[1]))) > 10 {
		t.Errorf("zooming moved the centre from %.3f, %.3f to %.3f, %.3f of the image", before[0], before[1], after[0], after[1])
	}
	screenshot(t, ctx, "label-image-zoomed.png")
	press(t, ctx, "-")
	until(t, ctx, `document.getElementById("img").dataset.zoom === "1.5625"`)
	press(t, ctx, "0")
	until(t, ctx, `document.getElementById("img").dataset.zoom === "1"`)
	if out := outside(t, ctx, "#img"); len(out) > 0 {
		t.Errorf("after 0 the image does not fit: %v", out)
	}

	// A tall image, then a small one, on a phone.
	press(t, ctx, "1")
	until(t, ctx, `document.getElementById("item-id").textContent === "Item cells1"`)
	until(t, ctx, fitted)
	if out := outside(t, ctx, "#img, #answers button"); len(out) > 0 {
		t.Errorf("tall image at 1366×768, not on screen: %v", out)
	}
	setViewport(t, ctx, 390, 844, true)
	reload(t, ctx)
	until(t, ctx, fitted)
	if out := outside(t, ctx, "#img, #zoombox, #answers button, #skip, #unsure, #howto summary"); len(out) > 0 {
		t.Errorf("at 390×844, not on screen: %v", out)
	}
	if eval[bool](t, ctx, `document.documentElement.scrollWidth > window.innerWidth + 1`) {
		t.Error("the phone page scrolls sideways")
	}
	screenshot(t, ctx, "label-image-390.png")
	if it := text(ctx, "#item-id"); it != "Item cells1" {
		t.Errorf("item %q", it)
	}
}

// TestDarkScheme follows the system's dark setting.
func TestDarkScheme(t *testing.T) {
	st := labelProject(t)
	p := serve(t, st, api.Config{Practice: -1, Check: -1}, map[string]bool{"dee": false})
	ctx := browser(t, 1366, 768)
	setViewport(t, ctx, 1366, 768, false)
	dark := chromedp.Func(func(ctx context.Context, tg *chromedp.Target) error {
		_, err := cdp.Call(ctx, tg, emulation.SetEmulatedMedia, emulation.SetEmulatedMediaParams{
			Features: []*emulation.MediaFeature{{Name: "prefers-color-scheme", Value: "dark"}}})
		return err
	})
	if err := chromedp.Do(ctx, dark); err != nil {
		t.Fatal(err)
	}
	signIn(t, ctx, p.ts.URL, p.tokens["dee"], "/label")
	bg := eval[string](t, ctx, `getComputedStyle(document.documentElement).backgroundColor`)
	ink := eval[string](t, ctx, `getComputedStyle(document.getElementById("item-text")).color`)
	if bg != "rgb(20, 23, 27)" || ink != "rgb(236, 232, 223)" {
		t.Errorf("dark scheme: background %s, text %s", bg, ink)
	}
	screenshot(t, ctx, "label-dark.png")
}

// boardProject is a project from the invented demo scenario after one
// round, served with an admin, two annotators (one has used up the check)
// and the practice gate on.
func boardProject(t *testing.T) *project {
	t.Helper()
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
	items, labels, gold := d.Of(handoff.KindText)
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	// One more person labels a few items a day for three weeks (for the
	// labels-per-day chart), with a quiet day between.
	day := time.Date(2026, 2, 2, 10, 0, 0, 0, time.UTC)
	for i := 0; i < 60; i++ {
		if i/3 == 9 {
			continue
		}
		labels = append(labels, handoff.Label{Item: items[i].ID, Annotator: "diary", Class: sim.TopicCodebook().Classes[i%5].Key,
			Time: day.Add(time.Duration(i/3) * 24 * time.Hour), Seconds: 4})
	}
	if _, err := st.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutGold(gold, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := round.Run(st, round.DefaultConfig(), "test"); err != nil {
		t.Fatal(err)
	}
	return serve(t, st, api.Config{}, map[string]bool{"lead": true, "ann-new": false})
}

// TestBoard checks the board on the invented demo scenario after a round:
// the verdict and its report, counts with thousands separators, the
// annotators tile counting people with labels, the sortable reliability
// table with the cleaning rules' reasons, "25 of N" for the next batch,
// alpha for orders only on an ordinal codebook, a labels-per-day chart with
// ticks; and people management — add a person (their token works), revoke
// their tokens (refused at once). Screenshots at 1366×768 and 390×844.
func TestBoard(t *testing.T) {
	p := boardProject(t)
	ctx := browser(t, 1366, 768)
	setViewport(t, ctx, 1366, 768, false)
	signIn(t, ctx, p.ts.URL, p.tokens["lead"], "/board")
	if err := chromedp.Do(ctx, chromedp.WaitVisible(chromedp.CSS("#decision")), chromedp.WaitVisible(chromedp.CSS("#report"))); err != nil {
		t.Fatal(err)
	}
	dec := text(ctx, "#decision")
	if !strings.HasPrefix(dec, "GO") && !strings.HasPrefix(dec, "NOT YET") {
		t.Errorf("decision %q", dec)
	}
	for _, sel := range []string{"#people table", "#agreement table", "#batch table", "#days svg", "#manage table"} {
		if n := eval[int](t, ctx, fmt.Sprintf(`document.querySelectorAll(%q).length`, sel)); n == 0 {
			t.Errorf("the board lacks %s", sel)
		}
	}
	stats, err := p.st.Stats()
	if err != nil {
		t.Fatal(err)
	}
	labellers, _ := p.st.AnnotatorsWithLabels()
	if got := text(ctx, "#tile-labels .n"); got != commas(stats.Labels) {
		t.Errorf("labels tile %q, want %s", got, commas(stats.Labels))
	}
	if got := text(ctx, "#tile-annotators .n"); got != fmt.Sprint(labellers) || labellers == stats.Annotators {
		t.Errorf("annotators tile %q; %d people have labels, the project knows %d", got, labellers, stats.Annotators)
	}
	if s := text(ctx, "#batch-summary"); !regexp.MustCompile(`^Round 1: showing 25 of [0-9,]+ items \(`).MatchString(s) {
		t.Errorf("next batch summary %q", s)
	}
	if a := text(ctx, "#agreement"); !strings.Contains(a, "alpha (nominal)") || strings.Contains(a, "alpha (ordinal)") || strings.Contains(a, "alpha (interval)") {
		t.Errorf("agreement on a nominal codebook: %q", a)
	}
	if n := eval[int](t, ctx, `document.querySelectorAll("#days .tick").length`); n < 2 {
		t.Errorf("the labels-per-day chart has %d ticks", n)
	}
	if !strings.Contains(text(ctx, "#people"), "dropped — ") {
		t.Errorf("the reliability table does not say why anyone was dropped: %.300s", text(ctx, "#people"))
	}
	// Sorting: by labels, most first, then fewest first.
	firstLabels := func() int {
		s := eval[string](t, ctx, `document.querySelector("#people tbody tr td:nth-child(2)").textContent`)
		var n int
		fmt.Sscan(strings.ReplaceAll(s, ",", ""), &n)
		return n
	}
	if err := chromedp.Do(ctx, chromedp.Click(`#people th:nth-child(2) button`)); err != nil {
		t.Fatal(err)
	}
	most := firstLabels()
	if err := chromedp.Do(ctx, chromedp.Click(`#people th:nth-child(2) button`)); err != nil {
		t.Fatal(err)
	}
	fewest := firstLabels()
	if most <= fewest || eval[string](t, ctx, `document.querySelector("#people th:nth-child(2)").getAttribute("aria-sort")`) != "ascending" {
		t.Errorf("sorting by labels: first row %d, then %d", most, fewest)
	}
	until(t, ctx, `(() => { const d = document.getElementById("report").contentDocument; return d && d.querySelectorAll("svg").length >= 3; })()`)
	screenshot(t, ctx, "board-1366.png")
	boardViews(t, ctx, "1366")

	// People management by keyboard: type an id, Enter, read the token.
	if err := chromedp.Do(ctx, chromedp.Focus(chromedp.CSS("#new-id")), chromedp.KeyEvent("coder-09"), chromedp.KeyEvent(kb.Enter)); err != nil {
		t.Fatal(err)
	}
	until(t, ctx, `document.getElementById("token-shown")`)
	tok := eval[string](t, ctx, `document.getElementById("token-shown").value`)
	me := func(tok string) int {
		req, _ := http.NewRequest("GET", p.ts.URL+"/api/v1/me", nil)
		req.Header.Set("Authorization", "Bearer "+tok)
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	if s := me(tok); s != http.StatusOK {
		t.Errorf("the token the board showed: %d", s)
	}
	shot(t, ctx, "board-people.png", chromedp.Screenshot(chromedp.CSS("#manage-title")))
	if err := chromedp.Do(ctx, chromedp.Click(`#manage tr[data-person="coder-09"] button[data-revoke]`)); err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx, chromedp.Click(`#manage tr[data-person="coder-09"] button.danger`)); err != nil {
		t.Fatal(err)
	}
	until(t, ctx, `document.getElementById("manage-status").textContent.startsWith("Revoked 1 token of coder-09")`)
	if s := me(tok); s != http.StatusUnauthorized {
		t.Errorf("the revoked token: %d", s)
	}
	until(t, ctx, `(document.querySelector('#manage tr[data-person="coder-09"]') || {textContent: ""}).textContent.includes("none (revoked)")`)
	// The board on a phone.
	setViewport(t, ctx, 390, 844, true)
	reload(t, ctx)
	if eval[bool](t, ctx, `document.documentElement.scrollWidth > window.innerWidth + 1`) {
		t.Error("the board scrolls sideways on a phone")
	}
	screenshot(t, ctx, "board-390.png")
	boardViews(t, ctx, "390")
}

// boardViews saves what the screen shows with each part of the board
// scrolled to the top (the whole page is too long to read in one image).
func boardViews(t *testing.T, ctx context.Context, size string) {
	t.Helper()
	for _, part := range []string{"title", "verdict-title", "days-title", "people-title", "manage-title", "batch-title"} {
		eval[bool](t, ctx, fmt.Sprintf(`(document.getElementById(%q).scrollIntoView({block: "start"}), true)`, part))
		shot(t, ctx, "board-"+size+"-"+strings.TrimSuffix(part, "-title")+".png", chromedp.CaptureScreenshot())
	}
}

// commas writes n with thousands separators.
func commas(n int) string {
	s := fmt.Sprint(n)
	for i := len(s) - 3; i > 0; i -= 3 {
		s = s[:i] + "," + s[i:]
	}
	return s
}

// TestReport shows the verdict's HTML report at 1366×768 and on a phone's
// 390×844: as the board's API serves it (the demo project, 5 classes) and
// as `loop verdict --html` writes it for ten classes with long names. At
// both sizes the page never scrolls sideways (wide tables scroll inside
// their own box), every plot's text stays inside its plot, and no key
// overlaps its plot. Screenshots of the whole page and of its top.
func TestReport(t *testing.T) {
	p := boardProject(t)
	file := filepath.Join(t.TempDir(), "report.html")
	writeTenClassReport(t, file)
	ctx := browser(t, 1366, 768)
	setViewport(t, ctx, 1366, 768, false)
	signIn(t, ctx, p.ts.URL, p.tokens["lead"], "/board")
	for _, src := range []struct{ url, name string }{{p.ts.URL + "/api/v1/verdict/report", "report"}, {"file://" + file, "report-10"}} {
		for _, v := range []struct {
			w, h  int
			phone bool
		}{{1366, 768, false}, {390, 844, true}} {
			setViewport(t, ctx, v.w, v.h, v.phone)
			if err := chromedp.Do(ctx, chromedp.Navigate(src.url), chromedp.WaitReady(chromedp.CSS("body"))); err != nil {
				t.Fatal(err)
			}
			where := fmt.Sprintf("%s at %d×%d", src.name, v.w, v.h)
			if plots := eval[int](t, ctx, `document.querySelectorAll("figure svg").length`); plots < 3 {
				t.Errorf("%s: %d plots", where, plots)
			}
			if sw, iw := eval[int](t, ctx, `document.documentElement.scrollWidth`), eval[int](t, ctx, `window.innerWidth`); sw > iw {
				t.Errorf("%s: the page is %d px wide in a %d px viewport: it scrolls sideways", where, sw, iw)
			}
			// Text drawn past a plot's edge is cut off.
			if out := eval[[]string](t, ctx, `[...document.querySelectorAll("figure svg")].flatMap((s) => {
				const b = s.getBoundingClientRect();
				return [...s.querySelectorAll("text")].filter((e) => { const r = e.getBoundingClientRect();
					return r.left < b.left - 0.5 || r.right > b.right + 0.5 || r.top < b.top - 0.5 || r.bottom > b.bottom + 0.5; })
					.map((e) => { const r = e.getBoundingClientRect(); return s.closest("figure").id + ": " + e.textContent + " " + [r.left - b.left, r.top - b.top, b.right - r.right, b.bottom - r.bottom].map((x) => x.toFixed(1)).join(","); }); })`); len(out) > 0 {
				t.Errorf("%s: text outside its plot: %v", where, out)
			}
			if out := eval[[]string](t, ctx, `[...document.querySelectorAll("figure")].filter((f) => {
				const k = f.querySelector("ul.key"), s = f.querySelector("svg");
				if (!k || !s) return false;
				const a = k.getBoundingClientRect(), b = s.getBoundingClientRect();
				return a.left < b.right && b.left < a.right && a.top < b.bottom && b.top < a.bottom; }).map((f) => f.id)`); len(out) > 0 {
				t.Errorf("%s: keys over their plots: %v", where, out)
			}
			name := fmt.Sprintf("%s-%d.png", src.name, v.w)
			screenshot(t, ctx, name)
			shot(t, ctx, strings.Replace(name, ".png", "-top.png", 1), chromedp.CaptureScreenshot())
		}
	}
}

// writeTenClassReport writes the HTML report of a verdict on ten classes
// with long names: a model right with probability equal to its confidence
// (seeded), 30 annotators, a learning curve.
func writeTenClassReport(t *testing.T, path string) {
	t.Helper()
	classes := []string{"water-quality", "bank-erosion", "wildlife-sighting", "litter-and-dumping", "flooding",
		"footpath-damage", "invasive-plants", "fishing", "noise-complaint", "something-else"}
	r := rand.New(rand.NewPCG(3, 9))
	in := verdict.Input{Classes: classes}
	for i := 0; i < 1500; i++ {
		truth := r.IntN(10)
		c := 0.6 + 0.4*math.Sqrt(r.Float64())
		pred := truth
		if r.Float64() > c {
			pred = (truth + 1 + r.IntN(9)) % 10
		}
		pr := make([]float64, 10)
		for j := range pr {
			pr[j] = (1 - c) / 9
		}
		pr[pred] = c
		in.Truth = append(in.Truth, truth)
		in.Proba = append(in.Proba, pr)
	}
	for i := 0; i < 3000; i++ {
		in.Archive = append(in.Archive, 0.6+0.4*math.Sqrt(r.Float64()))
	}
	for i := 0; i < 30; i++ {
		k := 0.3 + 0.6*float64(i)/29
		in.Annotators = append(in.Annotators, verdict.Annotator{ID: fmt.Sprintf("coder-%02d", i), Kappa: k, Agreement: 0.5 + k/2, Items: 100 + 9*i})
	}
	for _, n := range []int{150, 300, 600, 1200, 2400} {
		in.Curve = append(in.Curve, verdict.CurvePoint{Labels: n, Error: 0.9*math.Pow(float64(n), -0.4) + 0.02})
	}
	rep, err := verdict.Compute(in, verdict.Options{Seed: 2, Bootstrap: 200, TargetError: 0.05})
	if err != nil {
		t.Fatal(err)
	}
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := rep.WriteHTML(f, "Verdict on ten classes"); err != nil {
		t.Fatal(err)
	}
}

// TestBoardRunRound: "Run a round" shows the project's stored settings and
// asks first; with no labels new since the last round it says so and runs
// nothing; after new labels, confirming runs the round with the stored
// settings. Screenshots of both answers.
func TestBoardRunRound(t *testing.T) {
	p := boardProject(t)
	if _, err := round.SetSettings(p.st, []round.Override{{Key: "batch", Value: "30"}}, "test"); err != nil {
		t.Fatal(err)
	}
	ctx := browser(t, 1366, 768)
	setViewport(t, ctx, 1366, 768, false)
	signIn(t, ctx, p.ts.URL, p.tokens["lead"], "/board")

	// Nothing new since round 1.
	if err := chromedp.Do(ctx, chromedp.Click("#run-round")); err != nil {
		t.Fatal(err)
	}
	until(t, ctx, `document.getElementById("round-nothing")`)
	if s := text(ctx, "#round-nothing"); !strings.Contains(s, "no labels are new since round 1") || !strings.Contains(s, "would change nothing") {
		t.Errorf("with nothing new: %q", s)
	}
	if n := eval[int](t, ctx, `document.querySelectorAll("#round-go").length`); n != 0 {
		t.Error("a round is offered with nothing new")
	}
	shot(t, ctx, "board-round-nothing.png", chromedp.CaptureScreenshot())
	press(t, ctx, kb.Enter) // Close has the focus
	until(t, ctx, `document.getElementById("round-confirm").hidden && !document.getElementById("run-round").disabled`)

	// New labels: the board asks, showing the stored batch, then runs.
	items, err := p.st.ItemIDs()
	if err != nil {
		t.Fatal(err)
	}
	var ls []handoff.Label
	for i := 0; i < 7; i++ {
		ls = append(ls, handoff.Label{Item: items[i], Annotator: "late", Class: sim.TopicCodebook().Classes[i%3].Key})
	}
	if _, err := p.st.PutLabels(ls, "test"); err != nil {
		t.Fatal(err)
	}
	if err := chromedp.Do(ctx, chromedp.Click("#run-round")); err != nil {
		t.Fatal(err)
	}
	until(t, ctx, `document.getElementById("round-ask")`)
	ask := text(ctx, "#round-ask")
	if !strings.Contains(ask, "Run round 2, with 7 labels new since round 1") || !strings.Contains(ask, "stored settings") {
		t.Errorf("the question: %q", ask)
	}
	if s := text(ctx, "#round-settings"); !strings.Contains(s, "batch") || !strings.Contains(s, "30") || !strings.Contains(s, "stored") {
		t.Errorf("the settings shown: %q", s)
	}
	if rs, _ := p.st.Rounds(); len(rs) != 1 {
		t.Fatalf("a round ran before it was confirmed: %d rounds", len(rs))
	}
	shot(t, ctx, "board-round-ask.png", chromedp.CaptureScreenshot())
	press(t, ctx, kb.Enter) // "Run the round" has the focus
	until(t, ctx, `document.getElementById("round-status").textContent.startsWith("Round 2 finished")`)
	r, err := round.Latest(p.st)
	if err != nil {
		t.Fatal(err)
	}
	if r.Round != 2 || r.Config.Batch != 30 {
		t.Errorf("the board's round: round %d with batch %d, want round 2 with the stored batch 30", r.Round, r.Config.Batch)
	}
}

// TestBoardOrdinal: on an ordinal codebook the agreement card adds
// Krippendorff's alpha with the ordinal and interval metrics, which a
// nominal codebook does not show (TestBoard).
func TestBoardOrdinal(t *testing.T) {
	cb := handoff.Codebook{Name: "severity", Question: "How bad is it?", Scale: handoff.Ordinal,
		Classes: []handoff.Class{{Key: "none"}, {Key: "minor"}, {Key: "major"}}}
	st, err := store.Create(t.TempDir(), cb, "test")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { st.Close() })
	var items []handoff.Item
	var labels []handoff.Label
	day := time.Date(2026, 1, 5, 9, 0, 0, 0, time.UTC)
	for i := 0; i < 30; i++ {
		id := fmt.Sprintf("s%02d", i)
		items = append(items, handoff.Item{ID: id, Kind: handoff.KindText, Text: fmt.Sprintf("Report %d", i)})
		for a, who := range []string{"ana", "ben", "cy"} {
			c := i % 3
			if (i+a)%7 == 0 {
				c = (c + 1) % 3
			}
			labels = append(labels, handoff.Label{Item: id, Annotator: who, Class: cb.Classes[c].Key, Time: day.Add(time.Duration(i%4) * 24 * time.Hour)})
		}
	}
	if _, err := st.PutItems(items, false, "test"); err != nil {
		t.Fatal(err)
	}
	if _, err := st.PutLabels(labels, "test"); err != nil {
		t.Fatal(err)
	}
	p := serve(t, st, api.Config{}, map[string]bool{"lead": true})
	ctx := browser(t, 1366, 768)
	setViewport(t, ctx, 1366, 768, false)
	signIn(t, ctx, p.ts.URL, p.tokens["lead"], "/board")
	until(t, ctx, `document.querySelector("#agreement table")`)
	a := text(ctx, "#agreement")
	for _, m := range []string{"alpha (nominal)", "alpha (ordinal)", "alpha (interval)"} {
		if !strings.Contains(a, m) {
			t.Errorf("the agreement card of an ordinal codebook lacks %s: %q", m, a)
		}
	}
	shot(t, ctx, "board-ordinal-agreement.png", chromedp.Screenshot(chromedp.CSS("#agreement")))
}

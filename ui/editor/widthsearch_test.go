package editor

import (
	"fmt"
	"maps"
	"os"
	"os/exec"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
)

// TestWidthSearchUnderEdits makes 256 widen and narrow edits on a
// 10,000-layer stack with a budget, running every command the editor
// returns in its own goroutine as the terminal program does and feeding
// the answers back, and holds the child process to 150 MB peak RSS, each
// key's Update to a bound, and the searches to end soon after the last
// key. A superseded search must stop, not run on unseen: before it did,
// the edits piled up searches that held 2.5 GB and ran for minutes after
// the last key. The child reports its figures; the bounds are checked
// here. It takes about five seconds, so it runs when STACKFIT_RSS=1 is
// set, as .ci/run does.
func TestWidthSearchUnderEdits(t *testing.T) {
	if os.Getenv("STACKFIT_WIDTH_CHILD") == "1" {
		widthSearchChild(t)
		return
	}
	if os.Getenv("STACKFIT_RSS") != "1" {
		t.Skip("set STACKFIT_RSS=1 to run the width-search memory and latency check (.ci/run does)")
	}
	cmd := exec.Command(os.Args[0], "-test.run=^TestWidthSearchUnderEdits$", "-test.count=1", "-test.v")
	cmd.Env = append(os.Environ(), "STACKFIT_WIDTH_CHILD=1", "GOMEMLIMIT=", "GOGC=")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("child: %v\n%s", err, out)
	}
	got := map[string]int64{}
	for _, line := range strings.Split(string(out), "\n") {
		if strings.HasPrefix(line, "slowest ") {
			t.Log(line)
		}
		if f := strings.Fields(line); len(f) == 2 && strings.HasPrefix(f[0], "width-") {
			got[f[0]], _ = strconv.ParseInt(f[1], 10, 64)
		}
	}
	if got["width-keys"] == 0 {
		t.Fatalf("the child reported nothing:\n%s", out)
	}
	ms := func(k string) float64 { return float64(got[k]) / 1e6 }
	t.Logf("%d keys: Update median %.1f ms, 99th percentile %.1f ms, slowest %.1f ms; searches ended %.0f ms after the last key; peak RSS %.1f MiB",
		got["width-keys"], ms("width-median-ns"), ms("width-p99-ns"), ms("width-max-ns"), ms("width-drain-ns"), float64(got["width-peak-rss-kB"])/1024)
	// The target is 50 ms a key; an edit re-evaluates all 10,000 rows and
	// takes most of it, a cursor key microseconds. The child shares the
	// machine with whatever else runs, so a key may be descheduled: the
	// median is held to the target, the 99th percentile to three times it
	// and the slowest key to a second (with the searches piling up, the
	// 99th percentile was 280 ms here and one key took 3.8 s by hand).
	if ms("width-median-ns") > 50 {
		t.Errorf("median Update %.1f ms, over 50 ms", ms("width-median-ns"))
	}
	if ms("width-p99-ns") > 150 {
		t.Errorf("99th percentile of Update %.1f ms, over 150 ms", ms("width-p99-ns"))
	}
	if ms("width-max-ns") > 1000 {
		t.Errorf("slowest Update %.1f ms, over a second", ms("width-max-ns"))
	}
	// One search of this stack takes well under a second; stopped ones end
	// at their next re-evaluation. Ten seconds only catches a pile-up.
	if ms("width-drain-ns") > 10_000 {
		t.Errorf("the searches ran %.1f s after the last key", ms("width-drain-ns")/1000)
	}
	if kb := got["width-peak-rss-kB"]; kb == 0 {
		t.Logf("the child could not read its peak")
	} else if kb*1024 > 150_000_000 {
		t.Errorf("peak RSS %.1f MB, over 150 MB", float64(kb)*1024/1e6)
	}
}

// widthSearchChild is the child's work: the edits, with the commands run
// in the background and their messages handed to Update between keys.
func widthSearchChild(t *testing.T) {
	s := &engine.Stack{Name: "ten thousand", Input: engine.Shape{C: 8, H: 16, W: 16},
		Training: engine.Training{Batch: 32, Budget: 24 << 30}}
	for i := range 10_000 {
		l := engine.Layer{Kind: engine.KindConv, Filters: 8, Kernel: engine.Square(3), Pad: engine.Padding{Mode: engine.PadSame}}
		if i%2 == 1 {
			l = engine.Layer{Kind: engine.KindAct}
		}
		s.Layers = append(s.Layers, l)
	}
	m := newModel(t, s, 100, 30)
	msgs := make(chan tea.Msg, 1024)
	var running sync.WaitGroup
	var start func(cmd tea.Cmd)
	start = func(cmd tea.Cmd) {
		if cmd == nil {
			return
		}
		running.Add(1)
		go func() {
			defer running.Done()
			switch msg := cmd().(type) {
			case nil:
			case tea.BatchMsg:
				for _, c := range msg {
					start(c)
				}
			default:
				msgs <- msg
			}
		}()
	}
	start(m.Init())
	var took []time.Duration
	slowest := map[string]time.Duration{}
	send := func(msg tea.KeyMsg) {
		t0 := time.Now()
		_, cmd := m.Update(msg)
		d := time.Since(t0)
		took = append(took, d)
		slowest[msg.String()] = max(slowest[msg.String()], d)
		_ = m.View()
		start(cmd)
	}
	deliver := func() {
		for {
			select {
			case msg := <-msgs:
				_, cmd := m.Update(msg)
				start(cmd)
			default:
				return
			}
		}
	}
	const edits = 256
	for i := range edits {
		deliver()
		if i%2 == 0 {
			send(keyMsg("j")) // the cursor moves while a search runs
			send(keyMsg("j"))
			send(keyMsg(">")) // filters ×2 on a convolution
		} else {
			send(keyMsg("<")) // and back
		}
	}
	last := time.Now()
	if m.nums.widthState != widthSearching {
		t.Fatalf("no search under way after the edits (state %d)", m.nums.widthState)
	}
	ended := make(chan struct{})
	go func() { running.Wait(); close(ended) }()
	select {
	case <-ended:
	case <-time.After(2 * time.Minute):
		t.Fatal("the searches had not ended two minutes after the last key")
	}
	drain := time.Since(last)
	deliver()
	if m.nums.widthState != widthDone || m.nums.fit.MaxWidth <= 0 {
		t.Fatalf("the last search gave no answer (state %d, width %v)", m.nums.widthState, m.nums.fit.MaxWidth)
	}
	slices.Sort(took)
	for _, k := range slices.Sorted(maps.Keys(slowest)) {
		fmt.Printf("slowest %q: %v\n", k, slowest[k])
	}
	fmt.Printf("width-keys %d\n", len(took))
	fmt.Printf("width-median-ns %d\n", took[len(took)/2])
	fmt.Printf("width-p99-ns %d\n", took[len(took)*99/100])
	fmt.Printf("width-max-ns %d\n", took[len(took)-1])
	fmt.Printf("width-drain-ns %d\n", drain)
	if status, err := os.ReadFile("/proc/self/status"); err == nil {
		for _, line := range strings.Split(string(status), "\n") {
			if v, ok := strings.CutPrefix(line, "VmHWM:"); ok {
				fmt.Printf("width-peak-rss-kB %s\n", strings.TrimSuffix(strings.TrimSpace(v), " kB"))
			}
		}
	}
	runtime.KeepAlive(m)
}

// TestWidthSearchSuperseded checks that a newer search stops the one before
// it: the older command, run late, sends nothing and evaluates nothing;
// the newer one answers. A search also waits for the one storage rather
// than allocating its own.
func TestWidthSearchSuperseded(t *testing.T) {
	m := newModel(t, example(t), 100, 30)
	old := m.widthCmd()
	press(m, ">") // a change starts a newer search
	cur := m.widthCmd()
	if old == nil || cur == nil {
		t.Fatal("no search started")
	}
	if msg := old(); msg != nil {
		t.Errorf("a superseded search sent %#v", msg)
	}
	msg, ok := cur().(widthMsg)
	if !ok || msg.gen != m.nums.widthGen || msg.width <= 0 {
		t.Fatalf("the current search sent %#v", msg)
	}
	m.Update(msg)
	if m.nums.widthState != widthDone || m.nums.fit.MaxWidth != msg.width {
		t.Errorf("the current answer was not taken: state %d, width %v", m.nums.widthState, m.nums.fit.MaxWidth)
	}
	// While one search holds the storage, the next waits; stopping the
	// waiting one lets it return at once, with nothing.
	sc := <-m.nums.widthStore
	waiting := m.widthCmd()
	done := make(chan tea.Msg)
	go func() { done <- waiting() }()
	m.widthCmd() // supersedes it
	if msg := <-done; msg != nil {
		t.Errorf("a search stopped while waiting sent %#v", msg)
	}
	m.nums.widthStore <- sc
}

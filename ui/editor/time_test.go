package editor

import (
	"strings"
	"testing"

	"github.com/charmbracelet/x/ansi"
	"github.com/charmbracelet/x/exp/golden"

	"stackfit/engine"
	"stackfit/engine/report"
)

// timedExample is the example stack with a GPU model and a dataset set.
func timedExample(t *testing.T) *engine.Stack {
	t.Helper()
	s := example(t)
	s.Training.GPU = 1 + deviceIndex(t, "h100-sxm")
	s.Training.Dataset = 50000
	return s
}

func deviceIndex(t *testing.T, key string) int {
	t.Helper()
	for i, d := range engine.Devices() {
		if d.Key == key {
			return i
		}
	}
	t.Fatalf("no device %s", key)
	return -1
}

// TestFooterTime checks the time estimate beside the memory line: in
// full on a wide window, in short form at 80 columns, marked "≈" and the
// section titled as estimates, equal to the engine's roofline figures;
// and nothing of it without a GPU model.
func TestFooterTime(t *testing.T) {
	s := timedExample(t)
	var tm engine.Time
	r := engine.Evaluate(s)
	d, _ := s.Training.Device()
	r.Time(s.Training, d, s.Training.Efficiencies(), &tm)
	step, epoch := report.Seconds(tm.Step), report.Seconds(tm.Epoch)

	wide := view(newModel(t, s, 160, 40))
	for _, want := range []string{"step ≈" + step + " on h100-sxm", report.Rate(tm.SamplesPerSecond) + " samples/s", "epoch ≈" + epoch, "step time — estimates"} {
		if !strings.Contains(wide, want) {
			t.Errorf("160 columns: no %q in\n%s", want, wide)
		}
	}
	narrow := view(newModel(t, s, 80, 24))
	if !strings.Contains(narrow, "≈"+step+"/step · ≈"+epoch+"/epoch") {
		t.Errorf("80 columns: no short time in\n%s", narrow)
	}
	for i, l := range strings.Split(narrow, "\n") {
		if w := ansi.StringWidth(l); w > 80 {
			t.Errorf("line %d is %d wide", i+1, w)
		}
	}
	s.Training.Dataset = 0
	if v := view(newModel(t, s, 160, 40)); !strings.Contains(v, "step ≈"+step) || strings.Contains(v, "epoch ≈") {
		t.Errorf("without a dataset, the step and no epoch:\n%s", v)
	}
	plain := view(newModel(t, example(t), 160, 40))
	if strings.Contains(plain, "≈") || strings.Contains(plain, "step time") {
		t.Errorf("time shown without a GPU model:\n%s", plain)
	}
}

// TestSetupFormGPU checks that the setup form offers the GPU model (its
// help naming the devices) and the dataset, and that choosing a device
// there shows the time in the preview at once.
func TestSetupFormGPU(t *testing.T) {
	m := newModel(t, example(t), 160, 40)
	press(m, "t")
	v := view(m)
	if !strings.Contains(v, "GPU model for the time estimate: none, a100-40gb") || !strings.Contains(v, "samples per epoch") {
		t.Fatalf("the form lacks gpu or dataset:\n%s", v)
	}
	n := len(stackSpecs())
	for i, sp := range settingsSpecs() {
		if sp.key == "gpu" {
			n += i
			break
		}
	}
	for range n {
		press(m, "tab")
	}
	for range len("none") {
		press(m, "backspace")
	}
	typeText(m, "l4")
	if v := view(m); !strings.Contains(v, "step ≈") || !strings.Contains(v, " on l4") {
		t.Fatalf("no time in the preview after choosing l4:\n%s", v)
	}
	press(m, "enter")
	if d, ok := m.Stack().Training.Device(); !ok || d.Key != "l4" || !m.nums.timed {
		t.Fatalf("gpu after accepting: %+v %v", d, ok)
	}
}

// TestShareToggle checks the share bar's switch: refused without a GPU
// model, then between memory and time with the header and the status
// line saying which, and bars that follow the layers' estimated time.
func TestShareToggle(t *testing.T) {
	m := newModel(t, example(t), 100, 30)
	press(m, "%")
	if m.shareTime || !strings.Contains(m.StatusLine(), "needs a GPU model") {
		t.Fatalf("without a device: shareTime %v, status %q", m.shareTime, m.StatusLine())
	}
	m = newModel(t, timedExample(t), 100, 30)
	memView := view(m)
	press(m, "%")
	timeView := view(m)
	if !m.shareTime || !strings.Contains(m.StatusLine(), "estimated layer time on h100-sxm") {
		t.Fatalf("status %q", m.StatusLine())
	}
	header := strings.Split(timeView, "\n")[1]
	if !strings.HasSuffix(strings.TrimRight(header, " "), "time") || !strings.Contains(strings.Split(memView, "\n")[1], "share") {
		t.Errorf("headers: %q / %q", strings.Split(memView, "\n")[1], header)
	}
	if memView == timeView {
		t.Error("the bars did not change")
	}
	// The first row's bar is its share of the layer time.
	tm := &m.nums.time
	want := bar(tm.Layers[0].Forward+tm.Layers[0].Backward, tm.Forward+tm.Backward, colBar-1)
	if row := strings.Split(timeView, "\n")[2]; !strings.HasSuffix(row, " "+want) {
		t.Errorf("first row %q, want its bar %q", row, want)
	}
	press(m, "%")
	if m.shareTime || !strings.Contains(m.StatusLine(), "kept activations") || view(m) == timeView {
		t.Errorf("back to memory: status %q", m.StatusLine())
	}
}

// TestGoldenTime renders the example with a GPU model at 80×24, the share
// bar showing time.
func TestGoldenTime(t *testing.T) {
	m := newModel(t, timedExample(t), 80, 24)
	m.nums.fit.MaxWidth, m.nums.fit.WidthExact = 23.62, true
	m.nums.widthState = widthDone
	press(m, "%")
	golden.RequireEqual(t, []byte(view(m)))
}

// TestDeviceSetsBudget: a stack that names a GPU and no budget is held to
// the device's memory in the editor, as in the reports (the gpu setting's
// promise): the footer's fit answers and the width search use it.
func TestDeviceSetsBudget(t *testing.T) {
	s := example(t)
	s.Training.Budget = 0
	s.Training.GPU = 0
	plain := newModel(t, s.Clone(), 100, 30)
	if plain.nums.mem.Budget != 0 || plain.nums.fit.HasBudget {
		t.Fatalf("no device, no budget: budget %d", plain.nums.mem.Budget)
	}
	withGPU := s.Clone()
	var d engine.Device
	for i, dev := range engine.Devices() {
		if dev.Key == "l4" {
			d, withGPU.Training.GPU = dev, i+1
		}
	}
	if d.Key == "" {
		t.Fatal("no l4 in the device table")
	}
	m := newModel(t, withGPU, 100, 30)
	if m.nums.mem.Budget != d.Memory || !m.nums.fit.HasBudget || m.widthCmd() == nil {
		t.Errorf("with %s and no budget: budget %d, want %d; fit has budget %v", d.Key, m.nums.mem.Budget, d.Memory, m.nums.fit.HasBudget)
	}
}

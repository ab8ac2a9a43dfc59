package export

import (
	"os"
	"os/exec"
	"strings"
	"testing"

	"stackfit/engine"
	"stackfit/engine/stackfile"
)

// unitsEqual loads two exported modules and checks, with Debian's
// python3-torch, that they hold the same parameters in the same order
// (shapes and count) and, given the same weights, compute the same
// output in training mode: the file with units and the same file written
// out are one network.
const unitsEqual = `
import importlib.util, sys, torch
def load(path):
    spec = importlib.util.spec_from_file_location("m" + str(abs(hash(path))), path)
    m = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(m)
    return m
a, b = load(sys.argv[1]), load(sys.argv[2])
torch.manual_seed(0)
ma, mb = a.MODEL(), b.MODEL()
pa, pb = list(ma.state_dict().values()), list(mb.state_dict().values())
assert len(pa) == len(pb), (len(pa), len(pb))
for x, y in zip(pa, pb):
    assert x.shape == y.shape, (x.shape, y.shape)
mb.load_state_dict(dict(zip(mb.state_dict().keys(), pa)))
x = torch.randn(2, *a.INPUT_SHAPE)
ya, yb = ma(x), mb(x)
print("params", sum(p.numel() for p in ma.parameters()), "diff", float((ya - yb).abs().max()))
assert torch.equal(ya, yb)
print("classes", sorted({type(m).__name__ for m in ma.modules() if type(m).__name__.startswith("Unit")}))
`

// TestExportUnitsAsClasses: a stack written with units exports one class
// per unit (testdata/examples/cap-inspector-units.yaml: UnitCbr, UnitBasic),
// and is the same network as the stack written out inline.
func TestExportUnitsAsClasses(t *testing.T) {
	needReference(t)
	data, err := os.ReadFile("../../testdata/examples/cap-inspector-units.yaml")
	if err != nil {
		t.Fatal(err)
	}
	s, err := stackfile.Load(data)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	withUnits, an := exportFile(t, s, dir, "units")
	inline, _ := exportFile(t, engine.Inline(s), dir, "inline")
	code, _ := os.ReadFile(withUnits)
	for _, want := range []string{"class UnitCbr(nn.Module):", "class UnitBasic(nn.Module):", "self.l1_1 = UnitCbr(l1=nn.Conv2d(1, 32"} {
		if !strings.Contains(string(code), want) {
			t.Errorf("the export lacks %q", want)
		}
	}
	if strings.Count(string(code), "class UnitCbr") != 1 {
		t.Error("one class per unit")
	}
	out, err := exec.Command(python, "-c", unitsEqual, withUnits, inline).CombinedOutput()
	if err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	if !strings.Contains(string(out), "params 169379 ") || an.Result.Totals.Params != 169379 {
		t.Errorf("parameters: %s (engine %d)", out, an.Result.Totals.Params)
	}
	t.Logf("%s", out)
}

package cli

import (
	"io"
	"strings"
	"testing"
)

// BenchmarkReportResNet50 is `stackfit report resnet50.yaml --format json`
// inside one process: load, evaluate, memory, fit solver and the JSON
// printout (testdata/speed/compare.py sets it against PyTorch).
func BenchmarkReportResNet50(b *testing.B) {
	std := IO{In: strings.NewReader(""), Out: io.Discard, Err: io.Discard}
	args := []string{"report", "../../testdata/published/resnet50.yaml", "--format", "json"}
	b.ReportAllocs()
	for b.Loop() {
		if code := Run(args, std); code != ExitOK {
			b.Fatal(code)
		}
	}
}

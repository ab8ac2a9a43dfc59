package engine

import (
	"math"
	"strings"
	"testing"
)

// TestCeilBytes: a measured size is rounded up to the three significant
// digits FormatBytes shows, never down (an estimate built on it must stay
// an upper bound), and saving writes it the way a person reads it.
// Source: the calibration line's example, 27097776 bytes = 25.84 MiB.
func TestCeilBytes(t *testing.T) {
	for _, tt := range []struct {
		n     int64
		saved string
	}{
		{27097776, "25.9MiB"},
		{26 << 20, "26MiB"},    // exact: unchanged
		{536870912, "512MiB"},  // exact: unchanged
		{536870913, "513MiB"},  // one byte over: up to the next shown digit
		{1288490188, "1.2GiB"}, // just under 1.2 GiB (1288490188.8 bytes): up to its nearest byte
		{1288490190, "1.21GiB"},
		{1073741823, "1GiB"}, // just under 1 GiB: 1024 MiB
		{1000, "1000B"},      // under 1 KiB: as it is
		{0, "0B"},
	} {
		got := CeilBytes(tt.n)
		if got < tt.n {
			t.Errorf("CeilBytes(%d) = %d: rounded down", tt.n, got)
		}
		if s := FormatBytesExact(got); s != tt.saved {
			t.Errorf("CeilBytes(%d) = %d, saved as %q; want %q", tt.n, got, s, tt.saved)
		}
		if back, err := ParseBytes(FormatBytesExact(got)); err != nil || back != got {
			t.Errorf("%d saved as %q reads back as %d, %v", got, FormatBytesExact(got), back, err)
		}
		if again := CeilBytes(got); again != got {
			t.Errorf("CeilBytes(%d) = %d, but again %d: not idempotent", tt.n, got, again)
		}
	}
	// A spread of sizes from 1 KiB to 1 PiB: up, stable, and saved in a
	// unit rather than in bytes.
	for n := int64(1024); n < 1<<50; n = n*37/29 + 12345 {
		got := CeilBytes(n)
		s := FormatBytesExact(got)
		if back, err := ParseBytes(s); got < n || CeilBytes(got) != got || err != nil || back != got || !strings.HasSuffix(s, "iB") {
			t.Fatalf("CeilBytes(%d) = %d, again %d, saved %q (reads back %d, %v)", n, got, CeilBytes(got), s, back, err)
		}
	}
	for _, n := range []int64{1 << 50, math.MaxInt64, math.MaxInt64 - 1} {
		if got := CeilBytes(n); got < n {
			t.Errorf("CeilBytes(%d) = %d", n, got)
		}
	}
}

// TestFormatBytesExactKeepsUnits: sizes a unit divides keep their integer
// form (files saved before stay as they were); others that a short
// decimal reads back to exactly take it; the rest stay in bytes.
func TestFormatBytesExactKeepsUnits(t *testing.T) {
	for n, want := range map[int64]string{
		24 << 30: "24GiB", 1536 << 20: "1536MiB", 96: "96B", 1000: "1000B",
		27158118: "25.9MiB", 27097776: "27097776B", 1536: "1.5KiB", 734003201: "734003201B",
	} {
		if got := FormatBytesExact(n); got != want {
			t.Errorf("FormatBytesExact(%d) = %q, want %q", n, got, want)
		}
	}
}

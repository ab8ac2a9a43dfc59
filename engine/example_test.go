package engine_test

import (
	"fmt"

	"stackfit/engine"
)

// The quick-entry line is stackfit's own notation (README, "The
// quick-entry line"): the kind, its main value, then options, and "@name".
// Summary writes a layer back in the canonical form of that notation,
// leaving the name out (FuzzParseQuick checks that ParseQuick reads it back
// as the same layer). Case and extra spaces do not matter; a line that
// cannot be read says what to write instead.
func ExampleParseQuick() {
	for _, line := range []string{
		"conv 64 k3 s2 p1 @stem",
		"  CONV 32 k3x5 same dw nobias",
		"pool max k3 s2 p1",
		"act leaky-relu 0.2",
		"global-pool",
		"block 3 residual then relu",
		"concat skip1 crop",
		"dense 10",
		"conv 64",
		"den 10",
	} {
		l, err := engine.ParseQuick(line)
		if err != nil {
			fmt.Println(err)
			continue
		}
		if l.Name != "" {
			fmt.Printf("%s (named %s)\n", engine.Summary(&l), l.Name)
			continue
		}
		fmt.Println(engine.Summary(&l))
	}
	// Output:
	// conv 64 k3 s2 p1 (named stem)
	// conv 32 k3x5 same dw nobias
	// pool max k3 s2 p1
	// act leaky-relu 0.2
	// global-pool avg
	// block ×3 residual then relu
	// concat skip1 crop
	// dense 10
	// cannot read layer line: conv needs a kernel; add k3 (or k3x5)
	// cannot read layer line: unknown kind "den"; did you mean "dense"?
}

// ParseBytes reads the binary prefixes of IEC 80000-13 (KiB = 2¹⁰ bytes,
// GiB = 2³⁰) and the decimal SI prefixes (kB = 10³, GB = 10⁹) — both from
// memory of the standards; a bare K, M, G or T is binary (common practice
// for memory sizes). A bare number is refused: it needs a unit, B for
// bytes. FormatBytes writes three significant digits in binary units, so
// 24 GB shows as 22.4 GiB.
func ExampleParseBytes() {
	for _, s := range []string{"24GiB", "24GB", "24000MiB", "1.5 GiB", "80G", "512k", "96B", "24", "80000000000", "0", "lots"} {
		n, err := engine.ParseBytes(s)
		if err != nil {
			fmt.Println(err)
			continue
		}
		fmt.Printf("%-9s %12d = %s\n", s, n, engine.FormatBytes(n))
	}
	// Output:
	// 24GiB      25769803776 = 24.0 GiB
	// 24GB       24000000000 = 22.4 GiB
	// 24000MiB   25165824000 = 23.4 GiB
	// 1.5 GiB     1610612736 = 1.50 GiB
	// 80G        85899345920 = 80.0 GiB
	// 512k            524288 = 512 KiB
	// 96B                 96 = 96 B
	// 24 has no unit; write 24GiB (or 24GB, 24000MiB)
	// 80000000000 has no unit; write 80000000000B for bytes (or a size such as 24GiB)
	// 0                    0 = 0 B
	// not a memory size: "lots"; write a number and a unit, e.g. 24GiB, 24GB or 24000MiB
}

// FormatBytes keeps three significant digits and moves to the next binary
// unit at 1024 (IEC 80000-13, from memory); below 1 KiB it writes whole
// bytes.
func ExampleFormatBytes() {
	for _, n := range []int64{0, 1023, 1024, 1536, 10 << 20, 812 << 20, 3 << 39, -2048} {
		fmt.Println(engine.FormatBytes(n))
	}
	// Output:
	// 0 B
	// 1023 B
	// 1.00 KiB
	// 1.50 KiB
	// 10.0 MiB
	// 812 MiB
	// 1.50 TiB
	// -2.00 KiB
}

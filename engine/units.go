package engine

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// ErrSize is returned (wrapped) by ParseBytes for text that is not a size.
var ErrSize = errors.New("not a memory size")

var sizeUnits = []struct {
	suffix string
	mult   float64
}{
	{"kib", 1 << 10}, {"mib", 1 << 20}, {"gib", 1 << 30}, {"tib", 1 << 40},
	{"kb", 1e3}, {"mb", 1e6}, {"gb", 1e9}, {"tb", 1e12},
	{"k", 1 << 10}, {"m", 1 << 20}, {"g", 1 << 30}, {"t", 1 << 40},
	{"b", 1},
}

// ErrNoUnit is returned (wrapped, together with ErrSize) by ParseBytes for
// a bare number other than 0, such as "24".
var ErrNoUnit = errors.New("size without a unit")

// noUnitError is a bare number given as a size; its message names the fix.
type noUnitError struct{ msg string }

func (e *noUnitError) Error() string   { return e.msg }
func (e *noUnitError) Unwrap() []error { return []error{ErrSize, ErrNoUnit} }

// ParseBytes reads a memory size such as "24GiB", "24GB", "24000MiB",
// "1.5 GiB" or "96B". Binary units (KiB, MiB, GiB, TiB, and the bare
// letters K, M, G, T) are powers of 1024; decimal units (KB, MB, GB, TB) are
// powers of 1000; B is bytes. Case does not matter. A bare number is
// refused (wrapping ErrNoUnit) with a message naming the fix, since "24"
// is far more often a slip for 24GiB than 24 bytes — except 0, which
// needs no unit.
func ParseBytes(s string) (int64, error) {
	t := strings.ToLower(strings.TrimSpace(s))
	if t == "" {
		return 0, fmt.Errorf("%w: empty; write e.g. 24GiB", ErrSize)
	}
	mult, unit := 1.0, false
	for _, u := range sizeUnits {
		if strings.HasSuffix(t, u.suffix) {
			mult, unit = u.mult, true
			t = strings.TrimSpace(strings.TrimSuffix(t, u.suffix))
			break
		}
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%w: %q; write a number and a unit, e.g. 24GiB, 24GB or 24000MiB", ErrSize, s)
	}
	if v < 0 {
		return 0, fmt.Errorf("%w: %q is negative", ErrSize, s)
	}
	if !unit && v != 0 {
		return 0, &noUnitError{noUnitHint(t, v)}
	}
	b := v * mult
	if b >= math.MaxInt64 {
		return 0, fmt.Errorf("%w: %q is too large", ErrSize, s)
	}
	return int64(math.Round(b)), nil
}

// noUnitHint says how to write the bare number text (value v) as a size:
// with a unit of gigabytes for a number that reads as one, as bytes for a
// number too large for that.
func noUnitHint(text string, v float64) string {
	if v >= 1<<20 {
		return fmt.Sprintf("%s has no unit; write %sB for bytes (or a size such as 24GiB)", text, text)
	}
	thousand := strconv.FormatFloat(v*1000, 'f', -1, 64)
	return fmt.Sprintf("%s has no unit; write %sGiB (or %sGB, %sMiB)", text, text, text, thousand)
}

// FormatBytes writes n in binary units with three significant digits, e.g.
// "1.50 GiB", "812 MiB", "96 B".
func FormatBytes(n int64) string {
	if n < 0 {
		return "-" + FormatBytes(-n)
	}
	if n < 1024 {
		return strconv.FormatInt(n, 10) + " B"
	}
	units := []string{"KiB", "MiB", "GiB", "TiB", "PiB", "EiB"}
	v := float64(n) / 1024
	i := 0
	for v >= 1024 && i < len(units)-1 {
		v /= 1024
		i++
	}
	return formatSig(v) + " " + units[i]
}

// FormatBytesExact writes n for saving without loss: in the largest binary
// unit that divides it exactly ("24GiB", "1536MiB", "1000B"), or, when
// only bytes divide it, as a decimal of at most three places in its
// largest unit that ParseBytes reads back to n exactly ("25.9MiB" for
// 27158118, the byte nearest 25.9 MiB), else in bytes.
func FormatBytesExact(n int64) string {
	units := []string{"B", "KiB", "MiB", "GiB", "TiB"}
	i, m := 0, n
	for i < len(units)-1 && m != 0 && m%1024 == 0 {
		m /= 1024
		i++
	}
	if i == 0 && n >= 1024 {
		if s, ok := decimalBytes(n); ok {
			return s
		}
	}
	return strconv.FormatInt(m, 10) + units[i]
}

// decimalBytes writes n ≥ 1024 as a decimal in its largest binary unit
// (KiB to TiB) that ParseBytes reads back to n, with at most three places.
func decimalBytes(n int64) (string, bool) {
	units := []string{"KiB", "MiB", "GiB", "TiB"}
	unit, i := float64(1024), 0
	for i < len(units)-1 && float64(n) >= unit*1024 {
		unit *= 1024
		i++
	}
	for places := 1; places <= 3; places++ {
		s := strconv.FormatFloat(float64(n)/unit, 'f', places, 64) + units[i]
		if back, err := ParseBytes(s); err == nil && back == n {
			return s, true
		}
	}
	return "", false
}

// CeilBytes rounds n up to the precision FormatBytes shows (three
// significant digits in n's binary unit), so a measured size written for
// a person stays an upper bound: 27097776 (25.84 MiB) → 27158118 (the
// byte nearest 25.9 MiB, which FormatBytesExact writes "25.9MiB"). Sizes
// below 1 KiB are returned as they are.
func CeilBytes(n int64) int64 {
	if n < 1024 {
		return n
	}
	unit, v := 1.0, float64(n)
	for i := 0; i < 6 && v >= 1024; i++ {
		v /= 1024
		unit *= 1024
	}
	scale := 100.0 // as formatSig: 1.23, 12.3, 123
	switch {
	case v >= 100:
		scale = 1
	case v >= 10:
		scale = 10
	}
	// The smallest shown value whose nearest byte (as ParseBytes reads
	// it back) is at least n: a size saved as "1.2GiB" stays 1.2 GiB.
	k := math.Ceil(v * scale)
	if k > 1 && math.Round((k-1)/scale*unit) >= float64(n) {
		k--
	}
	up := math.Round(k / scale * unit)
	if !(up >= float64(n)) || up >= math.MaxInt64 {
		return n
	}
	return max(int64(up), n)
}

// formatSig formats v (≥ 1) with three significant digits.
func formatSig(v float64) string {
	switch {
	case v >= 100:
		return strconv.FormatFloat(v, 'f', 0, 64)
	case v >= 10:
		return strconv.FormatFloat(v, 'f', 1, 64)
	}
	return strconv.FormatFloat(v, 'f', 2, 64)
}

// FormatCount writes a count with an SI suffix and three significant digits,
// e.g. "138M", "4.09G", "9,216" below ten thousand.
func FormatCount(n int64) string {
	if n < 0 {
		return "-" + FormatCount(-n)
	}
	if n < 10000 {
		return GroupDigits(n)
	}
	v := float64(n)
	for _, u := range []string{"k", "M", "G", "T", "P", "E"} {
		v /= 1000
		if v < 999.5 {
			return formatSig(v) + u
		}
	}
	return GroupDigits(n)
}

// GroupDigits writes n with thousands separators: 138,357,544.
func GroupDigits(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	if neg {
		s = s[1:]
	}
	var b strings.Builder
	if neg {
		b.WriteByte('-')
	}
	pre := len(s) % 3
	if pre > 0 {
		b.WriteString(s[:pre])
	}
	for i := pre; i < len(s); i += 3 {
		if b.Len() > 0 && !(neg && b.Len() == 1) {
			b.WriteByte(',')
		}
		b.WriteString(s[i : i+3])
	}
	return b.String()
}

// ErrShare is returned (wrapped) by ParseShare for text that is not a share.
var ErrShare = errors.New("not a share")

// ParseShare reads a share of a whole: "10%" or "0.1". It must lie in [0, 0.9].
func ParseShare(s string) (float64, error) {
	t := strings.TrimSpace(s)
	pct := strings.HasSuffix(t, "%")
	v, err := strconv.ParseFloat(strings.TrimSpace(strings.TrimSuffix(t, "%")), 64)
	if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, fmt.Errorf("%w: %q; write a percentage such as 10%% or a fraction such as 0.1", ErrShare, s)
	}
	if pct {
		v /= 100
	}
	if v < 0 || v > 0.9 {
		return 0, fmt.Errorf("%w: %q is outside 0%%–90%%", ErrShare, s)
	}
	return v, nil
}

// FormatShare writes a share as a percentage ("10%", "12.5%").
func FormatShare(v float64) string {
	return strconv.FormatFloat(math.Round(v*1e8)/1e6, 'f', -1, 64) + "%"
}

package engine

import "strings"

// Device is one GPU model: its memory and the peaks the time estimate
// divides by, each from the vendor's datasheet named in Source.
//
// Throughputs are dense peaks (the datasheets print the 2:4-sparse figures
// beside them, twice as high; those are not used). The half-precision
// figures are tensor-core peaks with fp32 accumulation, as training runs
// them (the GeForce cards print a figure twice as high for fp16
// accumulation). A device without TF32 or BF16 tensor cores has 0 there
// and runs that precision at its fp32 rate.
type Device struct {
	Key  string // the --gpu name, e.g. "h100-sxm"
	Name string // the product, e.g. "NVIDIA H100 SXM 80GB"
	// Memory is the datasheet's memory size; the datasheets' GB of HBM
	// and GDDR are binary gigabytes (nvidia-smi reports slightly less, what
	// the driver keeps: the headroom covers it).
	Memory    int64
	Bandwidth float64 // memory bandwidth, bytes per second
	FP32      float64 // FLOP/s on the CUDA cores
	TF32      float64 // FLOP/s, TF32 tensor cores (0: none)
	FP16      float64 // FLOP/s, FP16 tensor cores, fp32 accumulation
	BF16      float64 // FLOP/s, BF16 tensor cores (0: none)
	// Link is the GPU-to-GPU bandwidth the datasheet gives, bytes per
	// second in both directions together (NVLink, or the PCIe slot for
	// cards without it); LinkKind names it.
	Link     float64
	LinkKind string
	Source   string // the datasheet the figures come from
	// smi are the words of the name nvidia-smi reports that pick this
	// device (all must appear); the table is searched in order, so a more
	// specific entry comes first.
	smi []string
}

const (
	tera = 1e12
	giga = 1e9
)

// devices is the device table, filled once as a literal. Figures are the
// datasheets' (see each Source); sparse figures are halved to dense.
var devices = []Device{
	{Key: "a100-40gb", Name: "NVIDIA A100 SXM4 40GB", Memory: 40 << 30, Bandwidth: 1555 * giga,
		FP32: 19.5 * tera, TF32: 156 * tera, FP16: 312 * tera, BF16: 312 * tera, Link: 600 * giga, LinkKind: "NVLink",
		Source: "NVIDIA A100 Tensor Core GPU datasheet (A100 40GB SXM column)", smi: []string{"A100"}},
	{Key: "a100-80gb", Name: "NVIDIA A100 SXM4 80GB", Memory: 80 << 30, Bandwidth: 2039 * giga,
		FP32: 19.5 * tera, TF32: 156 * tera, FP16: 312 * tera, BF16: 312 * tera, Link: 600 * giga, LinkKind: "NVLink",
		Source: "NVIDIA A100 Tensor Core GPU datasheet (A100 80GB SXM column)", smi: []string{"A100", "80GB"}},
	{Key: "h100-sxm", Name: "NVIDIA H100 SXM 80GB", Memory: 80 << 30, Bandwidth: 3350 * giga,
		FP32: 67 * tera, TF32: 494.5 * tera, FP16: 989.5 * tera, BF16: 989.5 * tera, Link: 900 * giga, LinkKind: "NVLink",
		Source: "NVIDIA H100 Tensor Core GPU datasheet (H100 SXM column)", smi: []string{"H100"}},
	{Key: "h100-pcie", Name: "NVIDIA H100 PCIe 80GB", Memory: 80 << 30, Bandwidth: 2000 * giga,
		FP32: 51 * tera, TF32: 378 * tera, FP16: 756 * tera, BF16: 756 * tera, Link: 128 * giga, LinkKind: "PCIe Gen5 x16",
		Source: "NVIDIA H100 Tensor Core GPU datasheet (H100 PCIe column)", smi: []string{"H100", "PCIE"}},
	{Key: "h200", Name: "NVIDIA H200 SXM 141GB", Memory: 141 << 30, Bandwidth: 4800 * giga,
		FP32: 67 * tera, TF32: 494.5 * tera, FP16: 989.5 * tera, BF16: 989.5 * tera, Link: 900 * giga, LinkKind: "NVLink",
		Source: "NVIDIA H200 Tensor Core GPU datasheet (H200 SXM column)", smi: []string{"H200"}},
	{Key: "l4", Name: "NVIDIA L4 24GB", Memory: 24 << 30, Bandwidth: 300 * giga,
		FP32: 30.3 * tera, TF32: 60 * tera, FP16: 121 * tera, BF16: 121 * tera, Link: 64 * giga, LinkKind: "PCIe Gen4 x16",
		Source: "NVIDIA L4 Tensor Core GPU datasheet", smi: []string{"L4"}},
	{Key: "l40s", Name: "NVIDIA L40S 48GB", Memory: 48 << 30, Bandwidth: 864 * giga,
		FP32: 91.6 * tera, TF32: 183 * tera, FP16: 362.05 * tera, BF16: 362.05 * tera, Link: 64 * giga, LinkKind: "PCIe Gen4 x16",
		Source: "NVIDIA L40S GPU datasheet", smi: []string{"L40S"}},
	{Key: "a10", Name: "NVIDIA A10 24GB", Memory: 24 << 30, Bandwidth: 600 * giga,
		FP32: 31.2 * tera, TF32: 62.5 * tera, FP16: 125 * tera, BF16: 125 * tera, Link: 64 * giga, LinkKind: "PCIe Gen4 x16",
		Source: "NVIDIA A10 Tensor Core GPU datasheet", smi: []string{"A10"}},
	{Key: "t4", Name: "NVIDIA T4 16GB", Memory: 16 << 30, Bandwidth: 320 * giga,
		FP32: 8.1 * tera, FP16: 65 * tera, Link: 32 * giga, LinkKind: "PCIe Gen3 x16",
		Source: "NVIDIA T4 Tensor Core GPU datasheet", smi: []string{"T4"}},
	{Key: "v100", Name: "NVIDIA V100 SXM2 32GB", Memory: 32 << 30, Bandwidth: 900 * giga,
		FP32: 15.7 * tera, FP16: 125 * tera, Link: 300 * giga, LinkKind: "NVLink",
		Source: "NVIDIA V100 Tensor Core GPU datasheet (V100 SXM2 column)", smi: []string{"V100"}},
	{Key: "rtx-3090", Name: "NVIDIA GeForce RTX 3090 24GB", Memory: 24 << 30, Bandwidth: 936 * giga,
		FP32: 35.6 * tera, TF32: 35.6 * tera, FP16: 71 * tera, BF16: 71 * tera, Link: 64 * giga, LinkKind: "PCIe Gen4 x16",
		Source: "NVIDIA Ampere GA102 GPU Architecture whitepaper (GeForce RTX 3090 column)", smi: []string{"3090"}},
	{Key: "rtx-4090", Name: "NVIDIA GeForce RTX 4090 24GB", Memory: 24 << 30, Bandwidth: 1008 * giga,
		FP32: 82.6 * tera, TF32: 82.6 * tera, FP16: 165.2 * tera, BF16: 165.2 * tera, Link: 64 * giga, LinkKind: "PCIe Gen4 x16",
		Source: "NVIDIA Ada GPU Architecture whitepaper (GeForce RTX 4090 column)", smi: []string{"4090"}},
}

// CPUDevice is the processor as a device: the gpu setting's "cpu", for
// estimates of training on the CPU. A processor has no datasheet figure
// the roofline can use as it stands, so its peaks are nominal — 1 TFLOP/s
// at every precision and 100 GB/s of memory bandwidth, round figures above
// what a desktop or server socket reaches — and the efficiencies that
// stackfit calibrate measures on the machine are shares of these. Without
// a calibration its estimate means nothing: calibrate first.
var CPUDevice = Device{Key: "cpu", Name: "CPU (nominal peaks; calibrate)", Bandwidth: 100 * giga, FP32: 1 * tera,
	LinkKind: "none", Source: "nominal figures, not a datasheet: the calibration's efficiencies are shares of them"}

// Devices returns the device table, in its display order (a copy).
func Devices() []Device { return append([]Device(nil), devices...) }

// DeviceKeys returns the devices' --gpu names, in order.
func DeviceKeys() []string {
	keys := make([]string, len(devices))
	for i, d := range devices {
		keys[i] = d.Key
	}
	return keys
}

// DeviceByKey returns the device whose --gpu name is key, any case
// ("cpu": CPUDevice).
func DeviceByKey(key string) (Device, bool) {
	k := strings.ToLower(strings.TrimSpace(key))
	if k == CPUDevice.Key {
		return CPUDevice, true
	}
	for _, d := range devices {
		if d.Key == k {
			return d, true
		}
	}
	return Device{}, false
}

// DeviceFromName recognises the device of a GPU name as nvidia-smi reports
// it ("NVIDIA A100-SXM4-80GB", "Tesla T4", "NVIDIA GeForce RTX 4090"): the
// most specific table entry whose words all appear among the name's words.
// ok is false for a GPU the table lacks.
func DeviceFromName(name string) (Device, bool) {
	words := strings.FieldsFunc(strings.ToUpper(name), func(r rune) bool {
		return !(r >= 'A' && r <= 'Z' || r >= '0' && r <= '9')
	})
	has := func(w string) bool {
		for _, x := range words {
			if x == w {
				return true
			}
		}
		return false
	}
	best, bestLen := -1, 0
	for i, d := range devices {
		all := true
		for _, w := range d.smi {
			all = all && has(w)
		}
		if all && len(d.smi) > bestLen {
			best, bestLen = i, len(d.smi)
		}
	}
	if best < 0 {
		return Device{}, false
	}
	return devices[best], true
}

// Peak returns the device's peak FLOP/s for a class of operation at a
// precision: convolutions and matrix products run on the tensor cores
// (fp32 as TF32, which PyTorch allows for cuDNN convolutions by default;
// from memory), falling back to the fp32 rate where the device lacks the
// format; memory-bound operations run on the CUDA cores at the fp32 rate.
func (d Device) Peak(c OpClass, p Precision) float64 {
	if c == ClassMemory || c == ClassNorm {
		return d.FP32
	}
	var v float64
	switch p {
	case FP32:
		v = d.TF32
	case FP16Mixed, FP16Master:
		v = d.FP16
	default:
		v = d.BF16
	}
	return max(v, d.FP32)
}

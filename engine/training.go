package engine

// Precision is the number format training runs in.
type Precision uint8

// Precisions.
//
// The mixed settings follow PyTorch's native automatic mixed precision
// (torch.autocast, as its documentation describes it): parameters, their
// gradients and the optimizer state stay fp32; convolutions and dense
// layers run in half precision on half-precision copies of their weights,
// which autocast caches in the forward pass and autograd keeps for
// backward; activations are half precision. The master settings are the
// other scheme (Micikevicius et al. 2018, and the model states of
// Rajbhandari et al. 2020): half-precision weights and gradients, with an
// fp32 master copy of the weights beside the optimizer state.
const (
	FP32       Precision = iota // everything in 32-bit floats
	FP16Mixed                   // autocast to fp16: fp32 weights, gradients and state; fp16 weight copies and activations
	BF16Mixed                   // autocast to bf16: as FP16Mixed with bf16
	BF16                        // everything in bf16, no master copy
	FP16Master                  // fp16 weights, gradients and activations, an fp32 master copy
	BF16Master                  // bf16 weights, gradients and activations, an fp32 master copy
)

var precisionNames = [...]string{"fp32", "fp16-mixed", "bf16-mixed", "bf16", "fp16-master", "bf16-master"}

// String returns the stack-file value.
func (p Precision) String() string {
	if int(p) < len(precisionNames) {
		return precisionNames[p]
	}
	return "invalid"
}

// Precisions lists the supported precisions.
func Precisions() []Precision {
	return []Precision{FP32, FP16Mixed, BF16Mixed, BF16, FP16Master, BF16Master}
}

// Optimizer is the update rule, which decides the optimizer state kept per
// parameter.
type Optimizer uint8

// Optimizers.
const (
	SGD      Optimizer = iota // plain SGD: no state
	Momentum                  // SGD with momentum: one buffer
	Adam                      // Adam: two moments
	AdamW                     // AdamW: two moments
	Adagrad                   // Adagrad: one accumulator
	RMSprop                   // RMSprop: one square average
)

var optimizerNames = [...]string{"sgd", "momentum", "adam", "adamw", "adagrad", "rmsprop"}

// String returns the stack-file value.
func (o Optimizer) String() string {
	if int(o) < len(optimizerNames) {
		return optimizerNames[o]
	}
	return "invalid"
}

// Optimizers lists the supported optimizers.
func Optimizers() []Optimizer { return []Optimizer{SGD, Momentum, Adam, AdamW, Adagrad, RMSprop} }

// Shard is how much model state is split across data-parallel GPUs: the
// three stages of Rajbhandari et al. 2020 (ZeRO), each including the last.
type Shard uint8

// Sharding stages.
const (
	ShardNone       Shard = iota // every GPU holds everything
	ShardOptimizer               // optimizer state (with any fp32 master weights) split
	ShardGradients               // + gradients split
	ShardParameters              // + the weights themselves split
)

var shardNames = [...]string{"none", "optimizer", "gradients", "parameters"}

// String returns the stack-file value.
func (s Shard) String() string {
	if int(s) < len(shardNames) {
		return shardNames[s]
	}
	return "invalid"
}

// Shards lists the sharding stages.
func Shards() []Shard { return []Shard{ShardNone, ShardOptimizer, ShardGradients, ShardParameters} }

// Defaults of the memory model (common practice; the CUDA figures are from
// memory and vary by driver, library and GPU: measure yours and override).
const (
	DefaultWorkspace = 256 << 20 // convolution-algorithm workspace
	DefaultOverhead  = 512 << 20 // CUDA context, library handles, allocator slack
	DefaultHeadroom  = 0.10      // share of the budget kept free for fragmentation and spikes
)

// Training holds the settings of one training step. Zero values mean
// defaults: batch 1 on one GPU, fp32, plain SGD, no sharding, no gradient
// accumulation or checkpointing, no budget.
type Training struct {
	Batch      int64 // samples per optimizer step, over all GPUs
	Precision  Precision
	Optimizer  Optimizer
	Budget     int64 // bytes per GPU; 0 means no budget
	GPUs       int64 // data-parallel GPUs; 0 means 1
	Shard      Shard
	Accumulate int64 // gradient-accumulation steps per optimizer step; 0 means 1
	Checkpoint int64 // keep every k-th row's output and recompute the rest; 0 means off
	Workspace  int64 // bytes; 0 means DefaultWorkspace
	Overhead   int64 // bytes; 0 means DefaultOverhead
	// Headroom is the share of the budget to keep free; HeadroomSet
	// distinguishes an explicit 0 from the default.
	Headroom    float64
	HeadroomSet bool
	// GPU is the device (1 + its index in Devices, 1 + len(Devices) for
	// CPUDevice; 0: none), for the time estimate and, when no budget is
	// set, the budget.
	GPU int
	// Efficiency is, per class of operation, the share of the device's
	// peak that a calibration measured (stackfit calibrate); 0 for a class
	// means its default (DefaultEfficiency).
	Efficiency Efficiency
	// Dataset is the training samples per epoch (0: not given).
	Dataset int64
}

// MicroBatch returns the samples one GPU holds per forward/backward pass:
// ⌈batch / (GPUs · accumulation steps)⌉.
func (t Training) MicroBatch() int64 {
	b, g, a := max(t.Batch, 1), max(t.GPUs, 1), max(t.Accumulate, 1)
	d := g * a
	if d <= 0 || g > 1<<32 || a > 1<<32 {
		return 1
	}
	return (b + d - 1) / d
}

// HeadroomShare returns the share of the budget kept free.
func (t Training) HeadroomShare() float64 {
	if t.HeadroomSet {
		return t.Headroom
	}
	return DefaultHeadroom
}

func orDefault(v, d int64) int64 {
	if v == 0 {
		return d
	}
	return v
}

// MaxDataset bounds the dataset setting (samples per epoch).
const MaxDataset = 1 << 40

// Device returns the device t names; ok is false when none.
func (t Training) Device() (d Device, ok bool) {
	if t.GPU == len(devices)+1 {
		return CPUDevice, true
	}
	if t.GPU <= 0 || t.GPU > len(devices) {
		return Device{}, false
	}
	return devices[t.GPU-1], true
}

// Efficiencies returns the efficiencies the time estimate uses: the
// calibrated ones t sets; a class t does not set takes its fallback
// class's calibrated one (a pointwise convolution the convolutions', a
// normalisation the element-wise kernels'), else the default.
func (t Training) Efficiencies() Efficiency {
	e := DefaultEfficiency()
	for c, v := range t.Efficiency {
		switch f := fallbackClass[c]; {
		case v > 0:
			e[c] = v
		case f != ClassNone && t.Efficiency[f] > 0:
			e[c] = t.Efficiency[f]
		}
	}
	return e
}

// WithDevice returns t with the budget set to the device's memory when t
// names a device and sets no budget of its own.
func (t Training) WithDevice() Training {
	if d, ok := t.Device(); ok && t.Budget == 0 {
		t.Budget = d.Memory
	}
	return t
}

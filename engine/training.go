package engine

// Precision is the number format training runs in.
type Precision uint8

// Precisions.
const (
	FP32      Precision = iota // everything in 32-bit floats
	FP16Mixed                  // fp16 compute copies, fp32 master weights
	BF16Mixed                  // bf16 compute copies, fp32 master weights
	BF16                       // everything in bf16, no master copy
)

var precisionNames = [...]string{"fp32", "fp16-mixed", "bf16-mixed", "bf16"}

// String returns the stack-file value.
func (p Precision) String() string {
	if int(p) < len(precisionNames) {
		return precisionNames[p]
	}
	return "invalid"
}

// Precisions lists the supported precisions.
func Precisions() []Precision { return []Precision{FP32, FP16Mixed, BF16Mixed, BF16} }

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

// Training holds the settings of one training step. Zero values mean
// defaults: batch 1, fp32, plain SGD, no budget.
type Training struct {
	Batch     int64
	Precision Precision
	Optimizer Optimizer
	Budget    int64 // bytes per GPU; 0 means no budget
}

package cli

import (
	"flag"
	"fmt"
	"strconv"

	"stackfit/engine"
)

// trainingFlags registers one flag per training setting; apply overrides
// the stack file's settings with the flags the user gave.
type trainingFlags struct {
	fs *flag.FlagSet
}

func addTrainingFlags(fs *flag.FlagSet) trainingFlags {
	fs.String("batch", "", "samples per optimizer step over all GPUs, e.g. 256")
	fs.String("precision", "", "fp32, fp16-mixed, bf16-mixed or bf16")
	fs.String("optimizer", "", "sgd, momentum, adam, adamw, adagrad or rmsprop")
	fs.String("budget", "", "GPU memory per device, e.g. 24GiB, 24GB, 24000MiB, or auto (ask nvidia-smi)")
	fs.String("gpus", "", "data-parallel GPUs, e.g. 8")
	fs.String("shard", "", "state split across GPUs: none, optimizer, gradients or parameters")
	fs.String("accumulate", "", "gradient-accumulation steps per optimizer step")
	fs.String("checkpoint", "", "keep every k-th layer's output and recompute the rest (0 = off)")
	fs.String("workspace", "", "convolution workspace, e.g. 256MiB")
	fs.String("overhead", "", "CUDA context and library overhead, e.g. 512MiB")
	fs.String("headroom", "", "share of the budget kept free, e.g. 10%")
	return trainingFlags{fs}
}

// apply returns t with every given flag applied, or an error naming the flag.
func (tf trainingFlags) apply(t engine.Training) (engine.Training, error) {
	var err error
	tf.fs.Visit(func(f *flag.Flag) {
		if err != nil {
			return
		}
		v := f.Value.String()
		switch f.Name {
		case "batch":
			t.Batch, err = intFlag(f.Name, v, 1, 1<<24)
		case "gpus":
			t.GPUs, err = intFlag(f.Name, v, 1, 1<<16)
		case "accumulate":
			t.Accumulate, err = intFlag(f.Name, v, 1, 1<<16)
		case "checkpoint":
			t.Checkpoint, err = intFlag(f.Name, v, 0, 1<<20)
		case "precision":
			var i int
			i, err = choiceFlag(f.Name, v, engine.Precisions())
			t.Precision = engine.Precision(i)
		case "optimizer":
			var i int
			i, err = choiceFlag(f.Name, v, engine.Optimizers())
			t.Optimizer = engine.Optimizer(i)
		case "shard":
			var i int
			i, err = choiceFlag(f.Name, v, engine.Shards())
			t.Shard = engine.Shard(i)
		case "budget":
			if v == "auto" {
				t.Budget, err = gpuMemory()
				if err != nil {
					err = fmt.Errorf("--budget auto: %w", err)
				}
				break
			}
			t.Budget, err = sizeFlag(f.Name, v)
		case "workspace":
			t.Workspace, err = sizeFlag(f.Name, v)
		case "overhead":
			t.Overhead, err = sizeFlag(f.Name, v)
		case "headroom":
			t.Headroom, err = engine.ParseShare(v)
			if err != nil {
				err = fmt.Errorf("--headroom: %w", err)
			}
			t.HeadroomSet = err == nil
		}
	})
	return t, err
}

func intFlag(name, v string, lo, hi int64) (int64, error) {
	n, err := strconv.ParseInt(v, 10, 64)
	if err != nil || n < lo || n > hi {
		return 0, fmt.Errorf("--%s %q: give a whole number from %d to %d", name, v, lo, hi)
	}
	return n, nil
}

func choiceFlag[T fmt.Stringer](name, v string, options []T) (int, error) {
	var names []string
	for i, o := range options {
		if o.String() == v {
			return i, nil
		}
		names = append(names, o.String())
	}
	return 0, fmt.Errorf("--%s %q: use one of %v", name, v, names)
}

func sizeFlag(name, v string) (int64, error) {
	b, err := engine.ParseBytes(v)
	if err != nil {
		return 0, fmt.Errorf("--%s: %w", name, err)
	}
	return b, nil
}

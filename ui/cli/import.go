package cli

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"stackfit/engine"
	"stackfit/engine/onnximport"
	"stackfit/engine/stackfile"
	"stackfit/engine/textsafe"
	"stackfit/ui/store"
)

// readModel reads the ONNX model at path (a regular file, at most
// onnximport.MaxFileBytes) and imports it as a stack named after the
// file, the import's notes kept in the stack's note. Its errors are
// onnximport.Import's (a *onnximport.Stopped comes with the layers before
// the node), or say why the file could not be read.
func readModel(path string) (*engine.Stack, *onnximport.Result, error) {
	f, err := store.OpenRegular(path)
	if err != nil {
		return nil, nil, err
	}
	data, err := readAllSized(f, onnximport.MaxFileBytes)
	f.Close()
	if err != nil {
		return nil, nil, fmt.Errorf("read %s: %w", path, err)
	}
	s, res, err := onnximport.Import(data, strings.TrimSuffix(filepath.Base(path), filepath.Ext(path)))
	if res == nil && err != nil {
		return nil, nil, fmt.Errorf("%s: %w", path, err)
	}
	if s != nil {
		for _, n := range res.Notes {
			s.Note = strings.TrimSpace(s.Note + "\n" + n)
		}
	}
	return s, res, err
}

// importModel reads the ONNX model at path for the editor. With partial, a
// node the import cannot express keeps the layers before it, and the note
// says so; otherwise it is an error. The note also carries the import's
// own notes.
func importModel(path string, partial bool) (*engine.Stack, string, error) {
	s, res, err := readModel(path)
	if res == nil && err != nil {
		return nil, "", err
	}
	var notes []string
	var stopped *onnximport.Stopped
	switch {
	case errors.As(err, &stopped) && partial && len(s.Layers) > 0:
		layers := fmt.Sprintf("the %d layers", len(s.Layers))
		if len(s.Layers) == 1 {
			layers = "the one layer"
		}
		notes = append(notes, fmt.Sprintf("imported %s before node %d, %q (%s), where the import stops: %s", layers, stopped.Position, stopped.Node, stopped.Op, stopped.Why))
	case err != nil:
		return nil, "", err
	}
	notes = append(notes, res.Notes...)
	return s, strings.Join(notes, "; "), nil
}

// runImport reads an ONNX model into a stack file.
func runImport(args []string, std IO) int {
	fs := flag.NewFlagSet("import", flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	out := fs.String("o", "", "")
	partial := fs.Bool("partial", false, "")
	pos, err := parseInterleaved(fs, args)
	if errors.Is(err, flag.ErrHelp) {
		fmt.Fprint(std.Out, commandUsage()["import"])
		return ExitOK
	}
	if err != nil || len(pos) != 1 {
		if err == nil {
			err = errors.New("give one ONNX model")
		}
		fmt.Fprintf(std.Err, "stackfit import: %s\n%s", textsafe.Text(err.Error()), commandUsage()["import"])
		return ExitUsage
	}
	model := pos[0]
	s, res, err := readModel(model)
	if res == nil && err != nil {
		fmt.Fprintf(std.Err, "stackfit import: %s\n", textsafe.Text(err.Error()))
		return ExitUsage
	}
	var stopped *onnximport.Stopped
	switch {
	case errors.As(err, &stopped) && *partial && len(s.Layers) > 0:
		fmt.Fprintf(std.Err, "stackfit import: %s — kept the %d layers before it (--partial)\n", textsafe.Text(err.Error()), len(s.Layers))
	case errors.As(err, &stopped):
		fmt.Fprintf(std.Err, "stackfit import: %s\n  %d of %d nodes were read; --partial writes the layers before this node\n", textsafe.Text(err.Error()), res.Read, res.Nodes)
		return ExitProblems
	case err != nil:
		fmt.Fprintf(std.Err, "stackfit import: %s\n", textsafe.Text(err.Error()))
		return ExitUsage
	}
	for _, n := range res.Notes {
		fmt.Fprintf(std.Err, "stackfit import: note: %s\n", textsafe.Text(n))
	}
	yaml, err := stackfile.Save(s)
	if err != nil {
		fmt.Fprintf(std.Err, "stackfit import: %s\n", textsafe.Text(err.Error()))
		return ExitUsage
	}
	if *out == "" {
		std.Out.Write(yaml)
		return ExitOK
	}
	if fileExists(*out) {
		fmt.Fprintf(std.Err, "stackfit import: %s exists; choose another name or remove it first\n", textsafe.Line(*out))
		return ExitUsage
	}
	if err := store.WriteFileAtomic(*out, yaml, 0o644); err != nil {
		fmt.Fprintf(std.Err, "stackfit import: %s\n", textsafe.Text(err.Error()))
		return ExitUsage
	}
	r := engine.Evaluate(s)
	units := ""
	switch n := len(s.Units); {
	case n == 1:
		units = ", 1 unit"
	case n > 1:
		units = fmt.Sprintf(", %d units", n)
	}
	fmt.Fprintf(std.Out, "wrote %s: %d top-level items%s, %d rows, %s parameters, from %d nodes; check it with: stackfit check %s\n",
		textsafe.Line(*out), len(s.Layers), units, len(r.Rows), engine.GroupDigits(r.Totals.Params), res.Nodes, textsafe.Line(*out))
	return ExitOK
}

// readAllSized reads an open regular file whole into one buffer of its
// size (io.ReadAll's growing buffer cleared and copied a 100 MB model
// several times over: a second of the import). It reads at most limit+1
// bytes, so a file over the limit is seen as such; a file that grew since
// its size was taken is read on to its end, within the same bound.
func readAllSized(f *os.File, limit int64) ([]byte, error) {
	size := int64(0)
	if fi, err := f.Stat(); err == nil && fi.Size() > 0 {
		size = min(fi.Size(), limit+1)
	}
	buf := make([]byte, size, size+1)
	n, err := io.ReadFull(f, buf)
	buf = buf[:n]
	switch {
	case err == io.ErrUnexpectedEOF || err == io.EOF:
		return buf, nil // shorter than it was: what is there
	case err != nil:
		return nil, err
	}
	more, err := io.ReadAll(io.LimitReader(f, limit+1-int64(len(buf))))
	if err != nil {
		return nil, err
	}
	return append(buf, more...), nil
}

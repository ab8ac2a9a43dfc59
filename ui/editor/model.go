// Package editor is stackfit's terminal editor: a keyboard-driven view of
// the layer stack where every change recomputes every number, with a side
// column of sizes and memory, a detail panel with the arithmetic, a budget
// gauge and the fit solver's answers.
package editor

import (
	"context"
	"fmt"
	"path/filepath"

	"github.com/charmbracelet/bubbles/help"
	tea "github.com/charmbracelet/bubbletea"

	"stackfit/engine"
	"stackfit/keymap"
	"stackfit/ui/store"
	"stackfit/ui/styles"
)

// Options configures a new editor.
type Options struct {
	Stack *engine.Stack // the stack to edit; nil starts an empty one
	Path  string        // where Save writes; "" asks on first save
	// SaveName is the file name save-as offers while Path is "" (an
	// imported model offers its own name as a stack file); "" offers
	// net.yaml.
	SaveName string
	// Base is the file's content as it was read (nil for a new file): a
	// save checks that the file still holds it and keeps its comments.
	Base    []byte
	NewFile bool // Path does not exist yet: ask for the input shape first
	Keys    keymap.KeyMap
	Styles  styles.Styles
	// KeysPath is the keys file the help screen names as the place for
	// one's own keys ("" names $STACKFIT_KEYS instead). The command line
	// works it out once, at start; the editor never reads the environment.
	KeysPath string
	// Files opens and saves stack files; nil leaves the editor without file
	// access (open and save then say so).
	Files Files
	// JournalFor returns where the unsaved edits of the stack file at path
	// are kept ("" for an untitled stack); nil keeps no journal.
	JournalFor func(path string) Journal
	// Recovery holds unsaved edits an earlier session left; the editor
	// offers to restore them.
	Recovery *Recovery
	// Notice is shown on the status line at start.
	Notice string
	// FoldsFor returns where the fold state of the stack file at path is
	// kept between runs; nil keeps none.
	FoldsFor func(path string) FoldState
}

// Files is how the editor reaches stack files on disk.
type Files interface {
	// Load reads the stack file at path and returns the bytes it read
	// too; its errors name the path.
	Load(path string) (*engine.Stack, []byte, error)
	// Save writes s to path so that a failed save leaves the old file
	// whole. base is what the editor last read from or wrote to path (nil
	// for a file it never had): unless mode allows it, a file that no
	// longer holds base is refused with store.ErrChanged, and one its
	// permissions protect with store.ErrReadOnly. It returns the bytes
	// written and a note for the status line ("" when none).
	Save(path string, s *engine.Stack, base []byte, mode store.SaveMode) ([]byte, string, error)
	// Names completes a file name: the stack files and folders whose
	// names start with prefix (folders end in "/"), sorted.
	Names(prefix string) []string
}

// Recovery is what an earlier session's journal held.
type Recovery struct {
	Stack *engine.Stack
	// About says what it is: when it was written, how many layers, and
	// why it cannot be trusted as the file's edits, if so.
	About string
	// AsNew, when set, is the name to restore under instead of the file
	// (a journal that is incomplete, of another file, or older than the
	// file on disk must not replace it).
	AsNew string
	// Discard removes the journal; nil when there is nothing to remove.
	Discard func() error
}

// Journal keeps unsaved edits so a crash loses nothing.
type Journal interface {
	// Record stores the current stack; it is called after every change.
	Record(s *engine.Stack) error
	// Rebase tells the journal the file's content as this session now
	// knows it (after a load or a save; nil when not on disk).
	Rebase(data []byte)
	// Clear forgets the journal (after a save or a clean quit).
	Clear() error
}

// status is the message line's kind.
type statusKind uint8

const (
	statusInfo statusKind = iota
	statusError
)

// Model is the editor's state.
type Model struct {
	keys keymap.KeyMap
	st   styles.Styles

	width, height int

	stack *engine.Stack
	file  fileState // the stack's file and its recovery journal
	nums  numbers   // the current stack's figures, recomputed on every change
	tree  stackTree // the visible lines of the stack view and the cursor

	help    help.Model // built once; its width follows the window
	overlay overlay    // the open form, picker, prompt, question, help or chart; nil when none

	// While a form is open, the numbers of its preview; previewBlocked
	// when a field is invalid, so nothing is estimated.
	preview        *engine.Analysis
	previewBlocked bool

	hist      history
	baseline  *baseline
	status    string
	statusK   statusKind
	statusNew bool // set since the last key: a long message shows whole
	quitting  bool
	detail    detailScroll // the details panel's scroll
	// shareTime: the side column's share bar shows each row's share of
	// the estimated time instead of the activation memory (while timed).
	shareTime bool
}

// fileState is where the stack lives: its file, what the editor last read
// or wrote there, and the journal that keeps unsaved edits.
type fileState struct {
	path string
	// saveName is what save-as offers while path is "".
	saveName string
	base     []byte // the file's content as last read or written; nil when never
	// unprotected: the last journal write failed, so a crash would lose
	// the unsaved edits; the header says so until a write succeeds.
	unprotected bool
	dirty       bool
	journal     Journal
	journalFor  func(string) Journal
	files       Files
	keysFile    string
	foldsFor    func(string) FoldState
}

// numbers are the current stack's figures, recomputed once per change.
type numbers struct {
	res    engine.Result
	mem    engine.Memory
	fit    engine.Fit
	cumAct []int64 // activation bytes of rows 0..i
	// time is the training-time estimate when the training names a GPU
	// model (timed), and cumTime the layer seconds of rows 0..i.
	time       engine.Time
	timed      bool
	cumTime    []float64
	assume     engine.Assumptions
	widthGen   int        // generation of the background width search
	widthState widthState // whether its answer is in
	// widthStop stops the latest search (running, or waiting for the
	// storage); a new search stops the one before it, so at most one runs.
	widthStop context.CancelFunc
	// widthStore holds the searches' storage while none runs (capacity
	// one): a search takes it before its first evaluation and gives it
	// back when it ends, so searches never run side by side and reuse one
	// set of rows instead of allocating their own.
	widthStore chan *widthScratch
}

// widthScratch is the storage the background width search evaluates into.
type widthScratch struct {
	res engine.Result
	mem engine.Memory
}

// stackTree is the stack view's state: the visible lines, the cursor,
// the scroll position, a marked range and what is folded.
type stackTree struct {
	items    []item
	numWidth int // digits of the largest item number
	cursor   int
	offset   int
	anchor   int             // start of a selected range, −1 when none
	folded   map[string]bool // items of the stack shown closed
	opened   map[string]bool // later repeats of blocks shown open (repeatKey)
	counts   counts          // of the stack's items, for the header
}

// New returns an editor for opt.
func New(opt Options) *Model {
	m := &Model{
		keys:   opt.Keys,
		st:     opt.Styles,
		stack:  opt.Stack,
		file:   fileState{path: opt.Path, saveName: opt.SaveName, base: opt.Base, journalFor: opt.JournalFor, files: opt.Files, keysFile: opt.KeysPath},
		tree:   stackTree{anchor: -1, folded: map[string]bool{}, opened: map[string]bool{}},
		nums:   numbers{assume: engine.DefaultAssumptions(), widthStore: make(chan *widthScratch, 1)},
		width:  80,
		height: 24,
	}
	if m.stack == nil {
		m.stack = &engine.Stack{Input: engine.Shape{C: 3, H: 224, W: 224}}
	}
	m.nums.widthStore <- &widthScratch{}
	m.help = help.New()
	m.help.Width = m.width
	m.help.ShortSeparator = " · "
	m.help.FullSeparator = "   "
	m.help.Styles.ShortKey, m.help.Styles.ShortDesc, m.help.Styles.ShortSeparator = m.st.Label, m.st.Help, m.st.Help
	m.help.Styles.FullKey, m.help.Styles.FullDesc = m.st.Label, m.st.Help
	if m.file.journalFor != nil {
		m.file.journal = m.file.journalFor(m.file.path)
		m.file.journal.Rebase(m.file.base)
	}
	m.file.foldsFor = opt.FoldsFor
	m.restoreFolds()
	m.recompute()
	if opt.NewFile {
		m.openPrompt(promptInput, "input shape of one sample, channels×height×width", "3x224x224")
		m.setStatus(fmt.Sprintf("new file %s: give the input shape, then add layers (a or :)", opt.Path), statusInfo)
	}
	if opt.Notice != "" {
		m.setStatus(opt.Notice, statusError)
	}
	if opt.Recovery != nil && opt.Recovery.Stack != nil {
		m.offerRecovery(opt.Recovery)
	}
	return m
}

// offerRecovery asks whether to restore the unsaved edits an earlier
// session left. Trusted ones replace the stack in place; others are
// restored under a new name, so the file on disk is not overwritten.
func (m *Model) offerRecovery(r *Recovery) {
	q := r.About + " — restore them? (y: restore · n: discard · esc: decide later)"
	if r.AsNew != "" {
		q = r.About + " — y: restore as " + filepath.Base(r.AsNew) + " (the file stays) · n: discard · esc: later"
	}
	m.ask(q, func() tea.Cmd {
		what := "restored the unsaved edits"
		if r.AsNew != "" {
			m.file.path, m.file.base = r.AsNew, nil
			if m.file.journalFor != nil {
				m.file.journal = m.file.journalFor(m.file.path)
				m.file.journal.Rebase(nil)
			}
			what += " as " + r.AsNew + " (not saved yet)"
		}
		cmd := m.change(what, func(st *engine.Stack) (addr, error) {
			*st = *r.Stack
			return nil, nil
		})
		if r.Discard != nil {
			r.Discard() // its edits now live in this session's journal
		}
		return cmd
	}, func() tea.Cmd {
		if r.Discard != nil {
			if err := r.Discard(); err != nil {
				m.setStatus("could not remove the recovery file: "+err.Error(), statusError)
				return nil
			}
		}
		m.setStatus("discarded the unsaved edits", statusInfo)
		return nil
	})
}

// Init starts the background width search.
func (m *Model) Init() tea.Cmd { return m.widthCmd() }

// Stack returns the stack being edited.
func (m *Model) Stack() *engine.Stack { return m.stack }

// Dirty reports unsaved changes.
func (m *Model) Dirty() bool { return m.file.dirty }

// Cursor returns the index of the selected item.
func (m *Model) Cursor() int { return m.tree.cursor }

// StatusLine returns the message line.
func (m *Model) StatusLine() string { return m.status }

func (m *Model) setStatus(s string, k statusKind) { m.status, m.statusK, m.statusNew = s, k, true }

// training is the stack's training settings as the estimates read them:
// a device (gpu) gives the budget when none is set, as in the reports.
func (m *Model) training() engine.Training { return m.stack.Training.WithDevice() }

// recompute re-evaluates the stack, its memory and the quick fit answers,
// and rebuilds the visible items. It runs once per change, never in View.
func (m *Model) recompute() {
	t := m.training()
	m.nums.res.Evaluate(m.stack)
	m.nums.res.Memory(t, m.nums.assume, &m.nums.mem)
	w, lim, ok := m.nums.fit.MaxWidth, m.nums.fit.WidthLimit, m.nums.fit.WidthExact
	m.nums.fit = engine.SolveCapacity(&m.nums.res, &m.nums.mem, t)
	m.nums.fit.MaxWidth, m.nums.fit.WidthLimit, m.nums.fit.WidthExact = w, lim, ok
	m.nums.cumAct = m.nums.cumAct[:0]
	var sum int64
	for _, b := range m.nums.mem.Rows {
		sum += b
		m.nums.cumAct = append(m.nums.cumAct, sum)
	}
	m.nums.cumTime = m.nums.cumTime[:0]
	m.nums.timed = false
	if d, ok := t.Device(); ok {
		m.nums.res.Time(t, d, t.Efficiencies(), &m.nums.time)
		m.nums.timed = m.nums.time.Estimated
		var sec float64
		for _, l := range m.nums.time.Layers {
			sec += l.Forward + l.Backward
			m.nums.cumTime = append(m.nums.cumTime, sec)
		}
	}
	m.tree.counts = counts{}
	countItems(m.stack.Layers, &m.tree.counts)
	m.tree.rebuild(m.stack, &m.nums.res)
	m.matchBaseline()
}

// widthMsg carries a finished background width search.
type widthMsg struct {
	gen   int
	width float64
	limit string
	exact bool
}

// widthState says where the background width search stands.
type widthState uint8

const (
	widthNone      widthState = iota // no search: no budget, or memory not estimated
	widthSearching                   // started; the answer is not in
	widthDone                        // the answer is in (0: nothing fits)
)

// widthCmd starts the width search for the current stack (it re-evaluates
// the stack a few dozen times, so it runs off the keystroke path). It
// stops the search before it: one that is running ends at its next
// re-evaluation, one still waiting for the storage never starts; a
// stopped search sends nothing.
func (m *Model) widthCmd() tea.Cmd {
	m.nums.widthGen++
	gen := m.nums.widthGen
	m.stopWidth()
	if m.training().Budget <= 0 || !m.nums.mem.Estimated {
		m.nums.fit.MaxWidth, m.nums.fit.WidthLimit, m.nums.widthState = 0, "", widthNone
		return nil
	}
	m.nums.widthState = widthSearching
	s := m.stack // never edited in place (see change), so safe to share
	t, a := m.training(), m.nums.assume
	ctx, stop := context.WithCancel(context.Background())
	m.nums.widthStop = stop
	store := m.nums.widthStore
	return func() tea.Msg {
		var sc *widthScratch
		select {
		case sc = <-store:
		case <-ctx.Done():
			return nil
		}
		defer func() { store <- sc }()
		w, lim, exact, err := engine.SearchWidth(ctx, s, t, a, &sc.res, &sc.mem)
		if err != nil {
			return nil
		}
		return widthMsg{gen, w, lim, exact}
	}
}

// stopWidth stops the latest width search, if any.
func (m *Model) stopWidth() {
	if m.nums.widthStop != nil {
		m.nums.widthStop()
		m.nums.widthStop = nil
	}
}

// channelsAt returns the channels flowing out of the selected item (the
// input's when the stack is empty).
func (m *Model) channelsAt() int64 {
	if it := m.tree.current(); it != nil && it.last >= 0 && m.nums.res.Rows[it.last].Status == engine.StatusOK {
		return m.nums.res.Rows[it.last].Out.C
	}
	return m.stack.Input.C
}

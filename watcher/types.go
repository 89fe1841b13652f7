package watcher

import (
	"context"
	"errors"
	"fmt"
	"path"
	"time"

	"plumb/watcher/decode"
)

// Defaults for the zero fields of Config.
const (
	DefaultDebounce      = 50 * time.Millisecond
	DefaultIdleFlush     = 30 * time.Second
	DefaultRescan        = 30 * time.Second
	DefaultMaxBatchBytes = 4 << 20
	DefaultRetryMin      = 500 * time.Millisecond
	DefaultRetryMax      = 30 * time.Second
	// FingerprintBytes is how many leading bytes of a file the fingerprint
	// covers at most.
	FingerprintBytes = 1024
)

// ErrConfig is wrapped by every configuration error from New.
var ErrConfig = errors.New("watcher: invalid configuration")

// Config configures a Watcher. Zero durations and sizes take the defaults
// above.
type Config struct {
	// Sources lists what to watch: one per model.
	Sources []Source
	// Debounce is how long events for one file are gathered before the
	// file is read: the first event of a quiet file opens a window of this
	// length, later events in the window merge into it, so a writer
	// appending line by line is read at most once per window.
	Debounce time.Duration
	// IdleFlush is how long a file must stay unchanged before a last line
	// without its newline is consumed as a record.
	IdleFlush time.Duration
	// Rescan is the interval of the safety-net rescan of every folder;
	// negative disables it.
	Rescan time.Duration
	// MaxBatchBytes bounds the bytes read for one Batch; a longer backlog
	// is delivered in several batches, interleaved with other files.
	MaxBatchBytes int
	// MaxRecordBytes is passed to each decoder (0: decode's default).
	MaxRecordBytes int
	// RetryMin and RetryMax bound the exponential backoff after a Deliver
	// error.
	RetryMin, RetryMax time.Duration
	// Progress, if set, receives backfill progress (from the watcher's
	// goroutine; it must not block). If nil and NoProgress is false, a
	// progress bar is drawn on stderr when it is a terminal, otherwise a
	// progress line is logged every few seconds.
	Progress   func(Progress)
	NoProgress bool
}

// Source is one model's view of one folder.
type Source struct {
	// Model names the model; each Source has its own (Model, Path) keys,
	// so model names must be unique within a Config.
	Model string
	// Folder is the directory watched. It must exist.
	Folder string
	// Pattern selects files: matched (path.Match) against the path
	// relative to Folder when it contains '/', else against the base name.
	// Empty means "*.csv". Files whose name starts with '.' are ignored
	// (atomic writers and editors use such names for temporary files).
	Pattern string
	// Recursive watches subfolders too (including ones created later).
	Recursive bool
	// Dialect, Numeric and Text configure the decoder of every file.
	Dialect decode.Dialect
	Numeric []string
	Text    []string
	// States are the read states saved for this model (from the store);
	// files with a state resume from it.
	States []FileState
}

// columns lists the columns the source selects: Numeric, then Text.
func (s Source) columns() []string {
	return append(append([]string(nil), s.Numeric...), s.Text...)
}

func (s Source) pattern() string {
	if s.Pattern == "" {
		return "*.csv"
	}
	return s.Pattern
}

// match reports whether rel (relative, with '/') is one of the source's files.
func (s Source) match(rel string) bool {
	base := path.Base(rel)
	if base == "" || base[0] == '.' {
		return false
	}
	if !s.Recursive && path.Dir(rel) != "." {
		return false
	}
	p := s.pattern()
	target := base
	for i := 0; i < len(p); i++ {
		if p[i] == '/' {
			target = rel
			break
		}
	}
	ok, _ := path.Match(p, target)
	return ok
}

func (s Source) validate() error {
	if s.Model == "" {
		return fmt.Errorf("%w: source for folder %q has no model name", ErrConfig, s.Folder)
	}
	if s.Folder == "" {
		return fmt.Errorf("%w: model %q: no folder", ErrConfig, s.Model)
	}
	if _, err := path.Match(s.pattern(), ""); err != nil {
		return fmt.Errorf("%w: model %q: pattern %q: %v", ErrConfig, s.Model, s.pattern(), err)
	}
	if err := s.Dialect.Validate(); err != nil {
		return fmt.Errorf("%w: model %q: %v", ErrConfig, s.Model, err)
	}
	return nil
}

// FileState is the read state of one file for one model. It mirrors the
// store's per-file source record field by field (Header as a slice
// instead of a joined string); the daemon converts between them.
type FileState struct {
	// Path is relative to the source's folder, with '/'.
	Path string
	// Generation counts rotations and truncations of the file.
	Generation int
	Inode      uint64
	// Size is the file size seen when Offset was reached.
	Size int64
	// Offset is the byte offset just past the last consumed record; Line
	// is the number of the last consumed line.
	Offset int64
	Line   int
	// Fingerprint is a hash (hex) of the first FingerprintLen bytes.
	Fingerprint    string
	FingerprintLen int
	// Header is the file's header row; HeaderLine its line (0: unknown).
	Header     []string
	HeaderLine int
	// Digest is the serialised state (encoding.BinaryMarshaler) of a
	// SHA-256 over the bytes [0, Offset), empty when unknown. When another
	// file (a new inode) appears at the path, as a save by writing a new
	// file and renaming it over the old one makes, the watcher hashes the
	// new file's first Offset bytes: if the hash is the same, it is the
	// same file grown and reading goes on from Offset.
	Digest []byte
}

// Sink receives what the watcher reads. Its methods are called from the
// watcher's single goroutine, one call at a time.
type Sink interface {
	// Deliver hands over one batch of records of one file. It should
	// commit the records and the batch's end state together. On a nil
	// return the watcher advances the file to EndOffset; on an error it
	// keeps the old position and delivers the same range again later
	// (with backoff), so a sink that stored the batch but still returned
	// an error will see it again and should treat an already stored range
	// as success.
	Deliver(ctx context.Context, b Batch) error
	// Notice reports something about a file that is not rows: rotation,
	// truncation, deletion, a changed header, a refused symlink, an error.
	// It must not block for long.
	Notice(ctx context.Context, n Notice)
}

// Batch is the unit of delivery: consecutive records of one file of one
// model, from StartOffset to EndOffset.
type Batch struct {
	Model string
	// Path is relative to the source folder, with '/'.
	Path       string
	Generation int
	Inode      uint64
	// Size is the file size when the batch was read.
	Size           int64
	Fingerprint    string
	FingerprintLen int
	Header         []string
	HeaderLine     int
	// Digest is the hash state after EndOffset (see FileState.Digest).
	Digest []byte
	// StartOffset/StartLine is the position the batch starts from (the
	// file's saved Offset/Line); EndOffset/EndLine the position after it.
	// EndOffset > StartOffset, or the batch only records a new generation
	// or a header.
	StartOffset, EndOffset int64
	StartLine, EndLine     int
	// Records are in file order, bad rows included (Err set).
	Records []decode.Record
}

// State returns the file state after the batch is committed.
func (b Batch) State() FileState {
	return FileState{Path: b.Path, Generation: b.Generation, Inode: b.Inode, Size: b.Size,
		Offset: b.EndOffset, Line: b.EndLine, Fingerprint: b.Fingerprint, FingerprintLen: b.FingerprintLen,
		Header: b.Header, HeaderLine: b.HeaderLine, Digest: b.Digest}
}

// NoticeKind says what a Notice is about.
type NoticeKind int

const (
	// HeaderChanged: the file's new content has a different header than
	// the one read before; the file is blocked (not read) until it changes
	// again, so columns are never misread.
	HeaderChanged NoticeKind = iota + 1
	// Rotated: another file now stands at the path (new inode); it is read
	// from offset 0 as Generation+1. Earlier rows stay.
	Rotated
	// Truncated: the file shrank or its first bytes changed (rewritten in
	// place); it is read from offset 0 as Generation+1.
	Truncated
	// Deleted: the file is gone. Its history stays.
	Deleted
	// Moved: a file appeared that is a known file under a new name (same
	// inode and first bytes); reading continues from the old position.
	Moved
	// Symlink: the path is a symbolic link that leads outside the folder,
	// cannot be resolved, or leads to a file the source reads under its
	// own name anyway; it is skipped.
	Symlink
	// Error: the file cannot be read or decoded (bad header, a selected
	// column missing, not a regular file, I/O error). Unless Detail says
	// otherwise the file is blocked until it changes.
	Error
	// Overflow: the kernel dropped events; every folder is rescanned.
	Overflow
	// Resaved: another file (new inode) stands at the path, and its first
	// bytes, up to the position already read, are the bytes already read
	// (a save by writing a new file and renaming it over the old one):
	// it is the same file grown, and reading continues where it was.
	Resaved
	// HardLink: the path is another name (a hard link: same device and
	// inode) of a file the source already reads under its first name; it
	// is skipped, so no row is read twice.
	HardLink
	// Unblocked: the cause of an earlier block went away (the file was
	// removed, replaced, or now fits); the file is read again, if it is
	// there. A sink clears the block it recorded for the file.
	Unblocked
)

func (k NoticeKind) String() string {
	switch k {
	case HeaderChanged:
		return "header-changed"
	case Rotated:
		return "rotated"
	case Truncated:
		return "truncated"
	case Deleted:
		return "deleted"
	case Moved:
		return "moved"
	case Symlink:
		return "symlink"
	case Error:
		return "error"
	case Overflow:
		return "overflow"
	case Resaved:
		return "resaved"
	case HardLink:
		return "hard-link"
	case Unblocked:
		return "unblocked"
	}
	return fmt.Sprintf("NoticeKind(%d)", int(k))
}

// Notice is a report about one file (Model and Path empty for Overflow).
type Notice struct {
	Model string
	Path  string
	Kind  NoticeKind
	// Generation is the file's generation after the event.
	Generation int
	// Detail is a sentence for people.
	Detail string
	// Blocked is true when the file is not read any more until it changes
	// (HeaderChanged, and Error for a bad header, a missing column or a
	// file that is not a regular file). Error notices with Blocked false
	// are passing I/O problems; the file is tried again on its next change.
	Blocked bool
	// Refused qualifies a blocked notice: the file has given this model no
	// rows (a stray file in the folder: another header, an unreadable
	// encoding, not a regular file), so only the file is refused and the
	// model goes on with its other files. A blocked notice without Refused
	// is about a file that has given rows and then changed its header: the
	// model's data is in doubt until the block clears.
	Refused bool
	// Err is the underlying error for Error notices (e.g. a
	// *decode.ColumnError), else nil.
	Err error
}

// Progress describes the backfill of files present at start.
type Progress struct {
	Files, FilesDone int
	Bytes, BytesDone int64
	Done             bool
}

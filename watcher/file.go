package watcher

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding"
	"encoding/hex"
	"errors"
	"fmt"
	"hash"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"plumb/watcher/decode"
)

// readChunk is the size of one read from a file.
const readChunk = 256 << 10

// identity is what a stat says about a file, to tell changes apart.
type identity struct {
	ino  uint64
	size int64
	mod  time.Time
}

func statID(fi os.FileInfo) identity {
	return identity{ino: inodeOf(fi), size: fi.Size(), mod: fi.ModTime()}
}

// tracked is the watcher's knowledge of one (source, file).
type tracked struct {
	key fileKey
	abs string

	state    FileState // committed: what the Sink has accepted
	hasState bool
	dec      *decode.Decoder

	// prevHeader is the header of the generation before a rotation or
	// truncation, until the new content's header has been compared to it;
	// prevRows tells whether that generation gave rows.
	prevHeader []string
	prevRows   bool

	blocked   bool     // not read until its identity changes
	blockedID identity // identity when blocked
	// noticed holds the detail of each kind already reported while
	// blocked, so a blocked file that keeps changing does not repeat
	// itself (a different finding is reported).
	noticed map[NoticeKind]string

	gone          bool
	symlinkTarget string
	linkOf        string // the path this one is a hard link of, when skipped

	retryAt time.Time
	backoff time.Duration

	partialSize  int64 // file size when an unconsumed tail was first seen; -1 none
	partialSince time.Time

	seen identity // last stat when processed

	// failed is the I/O failure last reported (what and the error), ""
	// when the last attempt worked: a file that stays unreadable (such as
	// permission denied) is reported once, not on every rescan.
	failed string

	backfill     bool
	backfillLeft int64
}

func newTracked(src *source, k fileKey) *tracked {
	return &tracked{key: k, abs: filepath.Join(src.abs, filepath.FromSlash(k.rel)), partialSize: -1}
}

// departed remembers the identity of a file that left its path (rotated
// away or deleted), so that a file appearing under another name with the
// same inode and first bytes continues where it was (no rows read twice).
type departed struct {
	src   int
	state FileState
	at    time.Time
}

const (
	maxDeparted = 256
	departedTTL = time.Hour
)

func fingerprint(b []byte) string {
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:16])
}

// process reads what is new in one file and delivers it.
func (w *Watcher) process(ctx context.Context, k fileKey) {
	src := w.srcs[k.src]
	t := w.files[k]
	if t == nil {
		t = newTracked(src, k)
		w.files[k] = t
	}
	now := w.now()
	if now.Before(t.retryAt) {
		w.pend.schedule(k, t.retryAt)
		return
	}
	lfi, err := os.Lstat(t.abs)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			w.gone(ctx, t)
			return
		}
		w.fileError(ctx, t, "cannot look at the file", err)
		return
	}
	if lfi.Mode()&fs.ModeSymlink != 0 {
		target, err := filepath.EvalSymlinks(t.abs)
		var detail string
		switch {
		case err != nil:
			target = "(unresolvable: " + err.Error() + ")"
			detail = fmt.Sprintf("symbolic link cannot be resolved: %v; skipped", err)
		case !within(src.real, target):
			detail = fmt.Sprintf("symbolic link to %s leads outside the watched folder %s; skipped", target, src.real)
		default:
			if rel, ok := relTo(src.real, target); ok && src.match(rel) {
				detail = fmt.Sprintf("symbolic link to %s, which is read under its own name; skipped so no row is read twice", rel)
			}
		}
		if detail != "" {
			if t.symlinkTarget != target {
				t.symlinkTarget = target
				w.notice(ctx, t, Notice{Kind: Symlink, Detail: detail})
			}
			return
		}
		t.symlinkTarget = ""
	}
	// Look before opening: a named pipe, a socket or a device is refused
	// without being opened (opening a pipe could block, reading a device
	// never ends).
	if sfi, err := os.Stat(t.abs); err == nil && !sfi.Mode().IsRegular() {
		w.block(ctx, t, statID(sfi), Notice{Kind: Error, Detail: notRegular(sfi)})
		return
	}
	f, err := openRead(t.abs)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			w.gone(ctx, t)
			return
		}
		w.fileError(ctx, t, "cannot open the file", err)
		return
	}
	defer f.Close()
	fi, err := f.Stat()
	if err != nil {
		w.fileError(ctx, t, "cannot stat the file", err)
		return
	}
	if !fi.Mode().IsRegular() {
		w.block(ctx, t, statID(fi), Notice{Kind: Error, Detail: notRegular(fi)})
		return
	}
	id := statID(fi)
	t.seen = id
	t.gone = false
	if !t.hasState && id.ino != 0 {
		if other := w.hardLinkOf(t, fi, id); other != "" {
			if t.linkOf != other {
				t.linkOf = other
				w.notice(ctx, t, Notice{Kind: HardLink, Detail: fmt.Sprintf(
					"another name (hard link) of %s, which is read under that name; skipped so no row is read twice", other)})
			}
			if t.backfill {
				w.backfillDone(t)
			}
			return
		}
		t.linkOf = ""
	}
	if t.blocked && id == t.blockedID {
		return // blocked files stay blocked until they change
	}
	prefix := make([]byte, min(id.size, FingerprintBytes))
	if n, err := f.ReadAt(prefix, 0); err != nil && !(errors.Is(err, io.EOF) && n == len(prefix)) {
		if errors.Is(err, io.EOF) {
			prefix = prefix[:n] // shrank since the stat
		} else {
			w.fileError(ctx, t, "cannot read the file", err)
			return
		}
	}
	if t.failed != "" {
		w.log.Info("file can be read again", "path", t.abs, "was", t.failed)
		t.failed = ""
	}
	if !t.hasState {
		w.adopt(ctx, t, id, prefix)
	}
	if !t.hasState {
		t.state = FileState{Path: k.rel, Inode: id.ino}
		t.hasState = true
	} else if kind, detail := changed(t.state, id, prefix); kind == Rotated {
		same, why, err := sameOldPart(t.state, f, id.size)
		switch {
		case err != nil:
			w.fileError(ctx, t, "cannot read the file", err)
			return
		case same:
			w.resaved(ctx, t, id, prefix)
		default:
			w.newGeneration(ctx, t, kind, detail+": "+why, id)
		}
	} else if kind != 0 {
		w.newGeneration(ctx, t, kind, detail, id)
	}
	if t.state.Inode == 0 {
		t.state.Inode = id.ino
	}
	w.read(ctx, t, f, id, prefix, now)
}

// changed compares a file with its saved state: a new inode is a
// rotation; a smaller size than the offset, or first bytes that differ
// from the fingerprint, is a truncation or an in-place rewrite.
func changed(st FileState, id identity, prefix []byte) (NoticeKind, string) {
	switch {
	case st.Inode != 0 && id.ino != 0 && st.Inode != id.ino:
		return Rotated, fmt.Sprintf("another file now stands at the path (inode %d, was %d); it is read from the start as a new generation", id.ino, st.Inode)
	case id.size < st.Offset:
		return Truncated, fmt.Sprintf("the file shrank from at least %d to %d bytes; reading it from the start", st.Offset, id.size)
	case st.FingerprintLen > len(prefix):
		return Truncated, fmt.Sprintf("the file shrank below the %d bytes seen before; reading it from the start", st.FingerprintLen)
	case st.FingerprintLen > 0 && fingerprint(prefix[:st.FingerprintLen]) != st.Fingerprint:
		return Truncated, "the first bytes of the file changed (rewritten in place); reading it from the start"
	}
	return 0, ""
}

// newGeneration starts the file over at offset 0 as the next generation.
func (w *Watcher) newGeneration(ctx context.Context, t *tracked, kind NoticeKind, detail string, id identity) {
	old := t.state
	w.depart(t.key.src, old)
	if len(old.Header) > 0 {
		t.prevHeader = old.Header
		t.prevRows = gaveRows(old)
	}
	t.state = FileState{Path: old.Path, Generation: old.Generation + 1, Inode: id.ino}
	t.dec = nil
	t.partialSize = -1
	w.notice(ctx, t, Notice{Kind: kind, Detail: detail})
}

func (w *Watcher) depart(src int, st FileState) {
	if st.Offset == 0 || st.Inode == 0 {
		return
	}
	now := w.now()
	keep := w.departed[:0]
	for _, d := range w.departed {
		if now.Sub(d.at) < departedTTL {
			keep = append(keep, d)
		}
	}
	w.departed = keep
	if len(w.departed) >= maxDeparted {
		w.departed = w.departed[1:]
	}
	w.departed = append(w.departed, departed{src: src, state: st, at: now})
}

// adopt looks for a known file that this new path continues: same inode,
// same first bytes, not shorter, and no longer at its old path. Its state
// then carries over, so a renamed file's rows are not read twice.
func (w *Watcher) adopt(ctx context.Context, t *tracked, id identity, prefix []byte) {
	if id.ino == 0 {
		return
	}
	same := func(st FileState) bool {
		return st.Inode == id.ino && st.Offset <= id.size && st.FingerprintLen <= len(prefix) &&
			(st.FingerprintLen == 0 || fingerprint(prefix[:st.FingerprintLen]) == st.Fingerprint)
	}
	var from *FileState
	for i, d := range w.departed {
		if d.src == t.key.src && same(d.state) {
			st := d.state
			from = &st
			w.departed = slices.Delete(w.departed, i, i+1)
			break
		}
	}
	if from == nil {
		for k, o := range w.files {
			if k.src != t.key.src || o == t || !o.hasState || !same(o.state) {
				continue
			}
			if fi, err := os.Stat(o.abs); err == nil && inodeOf(fi) == id.ino {
				continue // still there: a hard link, not a move
			}
			st := o.state
			from = &st
			break
		}
	}
	if from == nil || from.Offset == 0 {
		return
	}
	old := from.Path
	t.state = *from
	t.state.Path = t.key.rel
	t.hasState = true
	w.notice(ctx, t, Notice{Kind: Moved, Detail: fmt.Sprintf("continues %s (renamed); reading from byte %d", old, from.Offset)})
}

// gone handles a file that no longer exists.
func (w *Watcher) gone(ctx context.Context, t *tracked) {
	t.dec = nil
	t.partialSize = -1
	if t.backfill {
		w.backfillDone(t)
	}
	if t.blocked {
		t.blocked, t.noticed = false, nil
		w.notice(ctx, t, Notice{Kind: Unblocked, Detail: "the file was removed, and with it the cause of its block"})
	}
	if t.gone {
		return
	}
	if !t.hasState || (t.state.Offset == 0 && t.state.Generation == 0) {
		delete(w.files, t.key) // never read: nothing to report
		return
	}
	t.gone = true
	t.blocked, t.noticed = false, nil
	w.notice(ctx, t, Notice{Kind: Deleted, Detail: "the file was removed; its rows stay in the history"})
}

// fileError reports an I/O problem; the file is tried again on its next
// event or rescan.
func (w *Watcher) fileError(ctx context.Context, t *tracked, what string, err error) {
	t.dec = nil
	if t.backfill {
		w.backfillDone(t)
	}
	// Tried again on every event and rescan, but said only when the
	// failure changes: the same one again is not news.
	if msg := what + ": " + err.Error(); msg != t.failed {
		t.failed = msg
		w.notice(ctx, t, Notice{Kind: Error, Detail: msg + "; tried again when it changes", Err: err})
	}
}

// block stops reading t until its identity changes, with a notice. A
// file that has given no rows is refused alone (Notice.Refused).
func (w *Watcher) block(ctx context.Context, t *tracked, id identity, n Notice) {
	t.blocked = true
	t.blockedID = id
	n.Blocked = true
	n.Refused = !(t.hasState && gaveRows(t.state)) && !(t.prevHeader != nil && t.prevRows)
	w.notice(ctx, t, n)
	t.dec = nil
	if t.backfill {
		w.backfillDone(t)
	}
}

// read decodes from the file's position up to MaxBatchBytes and delivers
// the batch.
func (w *Watcher) read(ctx context.Context, t *tracked, f *os.File, id identity, prefix []byte, now time.Time) {
	if t.dec == nil {
		d, err := w.decoderFor(t)
		if err != nil {
			w.block(ctx, t, id, Notice{Kind: Error, Detail: decodeDetail(err, w.srcs[t.key.src].columns()), Err: err})
			return
		}
		t.dec = d
	}
	dec := t.dec
	flush := t.partialSize == id.size && !now.Before(t.partialSince.Add(w.cfg.IdleFlush))
	// Size the record slice for what is there to read (about 32 bytes a
	// row), so a backlog does not regrow it again and again.
	recs := make([]decode.Record, 0, min(max(id.size-dec.Offset(), 0), int64(w.cfg.MaxBatchBytes))/32+1)
	emit := func(r decode.Record) error {
		recs = append(recs, r)
		return nil
	}
	digest, err := resumeDigest(t.state, f)
	if err != nil {
		w.fileError(ctx, t, "cannot read the file", err)
		t.dec = nil
		return
	}
	hashed := t.state.Offset // digest covers [0, hashed)
	pos := dec.Offset()
	startPos := pos
	buf := w.buf[:0]
	read, eof, more := 0, false, false
	for {
		at := pos + int64(len(buf))
		if at >= id.size {
			eof = true
		} else {
			if cap(buf)-len(buf) < readChunk {
				nb := make([]byte, len(buf), len(buf)+2*readChunk)
				copy(nb, buf)
				buf = nb
			}
			want := int(min(int64(readChunk), id.size-at))
			n, err := f.ReadAt(buf[len(buf):len(buf)+want], at)
			buf = buf[:len(buf)+n]
			read += n
			if err != nil {
				if !errors.Is(err, io.EOF) {
					w.fileError(ctx, t, "cannot read the file", err)
					t.dec = nil
					return
				}
				eof = true // shrank since the stat; the next look tells
			}
		}
		consumed, err := dec.Feed(buf, eof && flush, emit)
		if err != nil {
			w.block(ctx, t, id, Notice{Kind: Error, Detail: decodeDetail(err, w.srcs[t.key.src].columns()), Err: err})
			return
		}
		// Hash what is now consumed while it is in the buffer (buf holds
		// the bytes from pos on); a gap (a skipped over-long record) is
		// hashed from the file below.
		if p, _ := dec.Pos(); p > hashed && hashed >= pos && p <= pos+int64(len(buf)) {
			digest.Write(buf[hashed-pos : p-pos])
			hashed = p
		}
		pos += int64(consumed)
		buf = buf[:copy(buf, buf[consumed:])]
		if eof {
			break
		}
		// Stop at MaxBatchBytes, but only after some progress: a record
		// longer than a batch is still read whole.
		if read >= w.cfg.MaxBatchBytes && pos > startPos {
			more = true
			break
		}
	}
	tail := len(buf)
	if cap(buf) <= 4*readChunk {
		w.buf = buf[:0]
	}
	if eof && tail > 0 {
		if t.partialSize != id.size {
			t.partialSize, t.partialSince = id.size, now
		}
		w.pend.schedule(t.key, t.partialSince.Add(w.cfg.IdleFlush))
	} else {
		t.partialSize = -1
	}

	hdr := dec.Header()
	if t.prevHeader != nil && hdr != nil {
		if !slices.Equal(hdr, t.prevHeader) {
			w.block(ctx, t, id, Notice{Kind: HeaderChanged, Detail: fmt.Sprintf(
				"the header changed from %s to %s; the file is not read until it changes, so no column is misread",
				quoteList(t.prevHeader), quoteList(hdr))})
			return
		}
		t.prevHeader, t.prevRows = nil, false
	}

	st := t.state
	endOff, endLine := dec.Pos()
	fpLen := len(prefix)
	b := Batch{
		Model: w.srcs[t.key.src].Model, Path: t.key.rel,
		Generation: st.Generation, Inode: id.ino, Size: id.size,
		Fingerprint: fingerprint(prefix), FingerprintLen: fpLen,
		Header: hdr, HeaderLine: dec.HeaderLine(),
		StartOffset: st.Offset, StartLine: st.Line,
		EndOffset: endOff, EndLine: endLine,
		Records: recs,
	}
	if b.EndOffset > b.StartOffset || len(recs) > 0 || (len(st.Header) == 0 && len(hdr) > 0) {
		if hashed < b.EndOffset {
			if _, err := io.Copy(digest, io.NewSectionReader(f, hashed, b.EndOffset-hashed)); err != nil {
				w.fileError(ctx, t, "cannot read the file", err)
				t.dec = nil
				return
			}
		}
		if b.Digest, err = digest.(encoding.BinaryMarshaler).MarshalBinary(); err != nil {
			panic("watcher: sha256 state: " + err.Error()) // the standard library's hash always marshals
		}
		if err := w.sink.Deliver(ctx, b); err != nil {
			t.dec = nil // start again from the committed state
			if ctx.Err() != nil {
				return
			}
			t.backoff = min(max(2*t.backoff, w.cfg.RetryMin), w.cfg.RetryMax)
			t.retryAt = w.now().Add(t.backoff)
			w.pend.schedule(t.key, t.retryAt)
			w.log.Warn("delivery failed; will retry from the same position",
				"model", b.Model, "path", b.Path, "offset", b.StartOffset, "retry_in", t.backoff, "err", err)
			return
		}
		t.state = b.State()
		t.backoff, t.retryAt = 0, time.Time{}
		if t.backfill {
			w.backfillAdvance(t, b.EndOffset-b.StartOffset)
		}
	}
	if t.blocked {
		t.blocked, t.noticed = false, nil
		w.notice(ctx, t, Notice{Kind: Unblocked, Detail: "the file changed and now fits the model; it is read again"})
	}
	if more {
		w.pend.schedule(t.key, w.now())
	} else if t.backfill {
		w.backfillDone(t)
	}
}

func quoteList(names []string) string {
	q := make([]string, len(names))
	for i, n := range names {
		q[i] = fmt.Sprintf("%q", n)
	}
	return "[" + strings.Join(q, ", ") + "]"
}

func (w *Watcher) backfillAdvance(t *tracked, n int64) {
	n = min(n, t.backfillLeft)
	t.backfillLeft -= n
	w.prog.advance(n, false)
}

func (w *Watcher) backfillDone(t *tracked) {
	t.backfill = false
	w.prog.advance(t.backfillLeft, true)
	t.backfillLeft = 0
}

// gaveRows reports whether a file's read state is past its header: the
// file has given the model rows (or at least lines after the header).
func gaveRows(st FileState) bool {
	return st.HeaderLine > 0 && st.Line > st.HeaderLine
}

// notRegular says what a path that is not a regular file is.
func notRegular(fi os.FileInfo) string {
	what := "not a regular file"
	switch m := fi.Mode(); {
	case m&fs.ModeNamedPipe != 0:
		what = "a named pipe (FIFO), not a regular file"
	case m&fs.ModeSocket != 0:
		what = "a socket, not a regular file"
	case m&fs.ModeDevice != 0:
		what = "a device, not a regular file"
	case m.IsDir():
		what = "a folder, not a file"
	}
	return what + "; it is not opened and its rows are not read"
}

// decodeDetail says why the decoder refuses a file.
// want lists the columns the source selects.
func decodeDetail(err error, want []string) string {
	var ce *decode.ColumnError
	if errors.As(err, &ce) && errors.Is(err, decode.ErrUnknownColumn) {
		at := ""
		if ce.Line > 0 {
			at = fmt.Sprintf(" (line %d)", ce.Line)
		}
		var lacks []string
		for _, c := range want {
			if !slices.Contains(ce.Available, c) && !slices.Contains(lacks, c) {
				lacks = append(lacks, c)
			}
		}
		if len(lacks) == 0 {
			lacks = []string{ce.Name}
		}
		return fmt.Sprintf("its header%s has other columns, %s, and lacks the model's %s; its rows are not read",
			at, quoteList(ce.Available), quoteList(lacks))
	}
	return err.Error() + "; its rows are not read until the file changes"
}

// hardLinkOf returns the path of another file of t's source, read under
// its own name, that is the same file as fi (same device and inode), or
// "" if there is none.
func (w *Watcher) hardLinkOf(t *tracked, fi os.FileInfo, id identity) string {
	for k, o := range w.files {
		if k.src != t.key.src || o == t || !o.hasState || o.gone || o.linkOf != "" || o.state.Inode != id.ino {
			continue
		}
		if ofi, err := os.Stat(o.abs); err == nil && os.SameFile(ofi, fi) {
			return k.rel
		}
	}
	return ""
}

// resumeDigest returns a SHA-256 over the file's bytes [0, st.Offset):
// from the saved state, or, for a state saved without one, by reading that
// part of the file once (it was checked to be unchanged by the caller).
func resumeDigest(st FileState, f io.ReaderAt) (hash.Hash, error) {
	h := sha256.New()
	if len(st.Digest) > 0 {
		if err := h.(encoding.BinaryUnmarshaler).UnmarshalBinary(st.Digest); err == nil {
			return h, nil
		}
		h.Reset()
	}
	if st.Offset > 0 {
		if _, err := io.Copy(h, io.NewSectionReader(f, 0, st.Offset)); err != nil {
			return nil, err
		}
	}
	return h, nil
}

// sameOldPart reports whether the file f (size bytes) begins with the
// bytes already read, [0, st.Offset), by their saved digest: one read of
// that part. When it does not, why says what differs.
func sameOldPart(st FileState, f io.ReaderAt, size int64) (same bool, why string, err error) {
	switch {
	case st.Offset == 0:
		return true, "", nil // nothing was read: nothing can differ
	case len(st.Digest) == 0:
		return false, "no digest of the part already read was kept, so the two cannot be compared", nil
	case size < st.Offset:
		return false, fmt.Sprintf("it has %d bytes, fewer than the %d already read", size, st.Offset), nil
	}
	want := sha256.New()
	if err := want.(encoding.BinaryUnmarshaler).UnmarshalBinary(st.Digest); err != nil {
		return false, "the saved digest of the part already read is unusable (" + err.Error() + ")", nil
	}
	got := sha256.New()
	if _, err := io.Copy(got, io.NewSectionReader(f, 0, st.Offset)); err != nil {
		return false, "", err
	}
	if !bytes.Equal(got.Sum(nil), want.Sum(nil)) {
		return false, fmt.Sprintf("its first %d bytes, the part already read, differ from the bytes read before", st.Offset), nil
	}
	return true, "", nil
}

// resaved continues t in a file saved anew at its path (a new inode whose
// first bytes are those already read): same generation, same position.
func (w *Watcher) resaved(ctx context.Context, t *tracked, id identity, prefix []byte) {
	old := t.state.Inode
	t.state.Inode = id.ino
	// The fingerprint now covers only verified bytes, so that bytes past
	// the position (an unfinished last line the save rewrote) are not
	// taken for an in-place rewrite on the next look.
	n := min(int64(len(prefix)), t.state.Offset)
	t.state.Fingerprint, t.state.FingerprintLen = fingerprint(prefix[:n]), int(n)
	t.partialSize = -1
	if t.state.Offset == 0 {
		return // nothing was read from the old file: nothing to say
	}
	w.notice(ctx, t, Notice{Kind: Resaved, Detail: fmt.Sprintf(
		"the file was saved anew (inode %d, was %d); its first %d bytes are the bytes already read, so reading continues at line %d",
		id.ino, old, t.state.Offset, t.state.Line+1)})
}

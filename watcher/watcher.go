package watcher

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/fsnotify/fsnotify"

	"plumb/watcher/decode"
)

// Watcher tails the files of every Source and hands their records to a
// Sink. Create it with New, run it with Run, stop it with Close (or by
// cancelling Run's context).
type Watcher struct {
	cfg  Config
	sink Sink
	log  *slog.Logger
	fsw  *fsnotify.Watcher

	srcs     []*source
	files    map[fileKey]*tracked
	departed []departed
	pend     *pending
	watched  map[string]bool
	buf      []byte
	prog     *progress
	now      func() time.Time

	mu      sync.Mutex
	running bool
	closed  bool
	cancel  context.CancelFunc
	done    chan struct{}
}

type source struct {
	Source
	abs  string // absolute, cleaned folder
	real string // folder with symlinks resolved
}

// New checks cfg, applies defaults and prepares a Watcher; nothing is
// read before Run. A nil logger discards log output.
func New(cfg Config, sink Sink, logger *slog.Logger) (*Watcher, error) {
	if sink == nil {
		return nil, fmt.Errorf("%w: nil sink", ErrConfig)
	}
	if logger == nil {
		logger = slog.New(slog.DiscardHandler)
	}
	if len(cfg.Sources) == 0 {
		return nil, fmt.Errorf("%w: no sources", ErrConfig)
	}
	def := func(d *time.Duration, v time.Duration) {
		if *d == 0 {
			*d = v
		}
	}
	def(&cfg.Debounce, DefaultDebounce)
	def(&cfg.IdleFlush, DefaultIdleFlush)
	def(&cfg.Rescan, DefaultRescan)
	def(&cfg.RetryMin, DefaultRetryMin)
	def(&cfg.RetryMax, DefaultRetryMax)
	if cfg.MaxBatchBytes <= 0 {
		cfg.MaxBatchBytes = DefaultMaxBatchBytes
	}
	if cfg.Debounce < 0 || cfg.IdleFlush < 0 || cfg.RetryMin < 0 || cfg.RetryMax < cfg.RetryMin {
		return nil, fmt.Errorf("%w: negative or inverted durations", ErrConfig)
	}
	w := &Watcher{
		cfg: cfg, sink: sink, log: logger,
		files:   make(map[fileKey]*tracked),
		pend:    newPending(cfg.Debounce),
		watched: make(map[string]bool),
		now:     time.Now,
	}
	models := make(map[string]bool)
	for i, s := range cfg.Sources {
		if err := s.validate(); err != nil {
			return nil, err
		}
		if models[s.Model] {
			return nil, fmt.Errorf("%w: model %q has more than one source", ErrConfig, s.Model)
		}
		models[s.Model] = true
		abs, err := filepath.Abs(s.Folder)
		if err != nil {
			return nil, fmt.Errorf("%w: model %q: folder %q: %v", ErrConfig, s.Model, s.Folder, err)
		}
		fi, err := os.Stat(abs)
		if err != nil {
			return nil, fmt.Errorf("%w: model %q: %v", ErrConfig, s.Model, err)
		}
		if !fi.IsDir() {
			return nil, fmt.Errorf("%w: model %q: %s is not a folder", ErrConfig, s.Model, abs)
		}
		real, err := filepath.EvalSymlinks(abs)
		if err != nil {
			return nil, fmt.Errorf("%w: model %q: %v", ErrConfig, s.Model, err)
		}
		src := &source{Source: s, abs: abs, real: real}
		w.srcs = append(w.srcs, src)
		for _, st := range s.States {
			k := fileKey{src: i, rel: st.Path}
			if _, dup := w.files[k]; dup {
				return nil, fmt.Errorf("%w: model %q: two states for %q", ErrConfig, s.Model, st.Path)
			}
			t := newTracked(src, k)
			t.state, t.hasState = st, true
			t.state.Header = append([]string(nil), st.Header...)
			w.files[k] = t
		}
	}
	w.prog = newProgress(cfg, logger)
	fsw, err := fsnotify.NewBufferedWatcher(4096)
	if err != nil {
		return nil, fmt.Errorf("watcher: %w", err)
	}
	w.fsw = fsw
	return w, nil
}

// Run watches until ctx is cancelled or Close is called, then returns nil.
// It first scans every folder and reads what is there (the backfill),
// then follows events. Run may be called once.
func (w *Watcher) Run(ctx context.Context) error {
	w.mu.Lock()
	if w.closed || w.running {
		w.mu.Unlock()
		return errors.New("watcher: Run called twice or after Close")
	}
	w.running = true
	ctx, cancel := context.WithCancel(ctx)
	w.cancel = cancel
	w.done = make(chan struct{})
	w.mu.Unlock()
	defer close(w.done)
	defer cancel()

	w.initialScan()
	timer := time.NewTimer(time.Hour)
	defer timer.Stop()
	var rescan <-chan time.Time
	if w.cfg.Rescan > 0 {
		tk := time.NewTicker(w.cfg.Rescan)
		defer tk.Stop()
		rescan = tk.C
	}
	for {
		if ctx.Err() != nil {
			return nil
		}
		if next, ok := w.pend.next(); ok {
			timer.Reset(max(0, next.Sub(w.now())))
		} else {
			timer.Reset(time.Hour)
		}
		select {
		case <-ctx.Done():
			return nil
		case ev, ok := <-w.fsw.Events:
			if !ok {
				return errors.New("watcher: event channel closed")
			}
			w.onEvent(ev)
		case err, ok := <-w.fsw.Errors:
			if !ok {
				return errors.New("watcher: error channel closed")
			}
			w.onError(ctx, err)
		case <-timer.C:
			w.flush(ctx)
		case <-rescan:
			w.rescan()
		}
	}
}

// Close stops Run (waiting for it to return) and releases the watches.
func (w *Watcher) Close() error {
	w.mu.Lock()
	if w.closed {
		w.mu.Unlock()
		return nil
	}
	w.closed = true
	cancel, done := w.cancel, w.done
	w.mu.Unlock()
	if cancel != nil {
		cancel()
		<-done
	}
	return w.fsw.Close()
}

// onEvent merges one fsnotify event into the pending set.
func (w *Watcher) onEvent(ev fsnotify.Event) {
	if ev.Op == fsnotify.Chmod {
		return
	}
	now := w.now()
	name := filepath.Clean(ev.Name)
	if ev.Has(fsnotify.Create) {
		if fi, err := os.Lstat(name); err == nil && fi.IsDir() {
			w.newDir(name)
			return
		}
	}
	if ev.Has(fsnotify.Remove) || ev.Has(fsnotify.Rename) {
		if w.watched[name] {
			// A watched folder went away: forget its watch and look at the
			// files we know below it.
			delete(w.watched, name)
			_ = w.fsw.Remove(name)
			for k, t := range w.files {
				if strings.HasPrefix(t.abs, name+string(filepath.Separator)) {
					w.pend.event(k, ev.Op, now, t.retryAt)
				}
			}
			return
		}
	}
	for i, src := range w.srcs {
		rel, ok := relTo(src.abs, name)
		if !ok || !src.match(rel) {
			continue
		}
		k := fileKey{src: i, rel: rel}
		var notBefore time.Time
		if t := w.files[k]; t != nil {
			notBefore = t.retryAt
		}
		w.pend.event(k, ev.Op, now, notBefore)
	}
}

// newDir adds watches for a folder that appeared (it gives no events for
// files created in it before the watch) and schedules the files in it.
func (w *Watcher) newDir(dir string) {
	now := w.now()
	for i, src := range w.srcs {
		rel, ok := relTo(src.abs, dir)
		if !ok || !src.Recursive {
			continue
		}
		_ = rel
		for _, f := range w.walk(src, dir) {
			k := fileKey{src: i, rel: f}
			w.pend.event(k, fsnotify.Create, now, time.Time{})
		}
	}
}

func (w *Watcher) onError(ctx context.Context, err error) {
	if errors.Is(err, fsnotify.ErrEventOverflow) {
		w.log.Warn("file events were dropped; rescanning every folder", "err", err)
		w.notice(ctx, nil, Notice{Kind: Overflow, Detail: "the kernel dropped file events; every folder is rescanned"})
		w.rescan()
		return
	}
	w.log.Warn("file watch error", "err", err)
}

// flush reads every file that is due, draining new events between files
// so the kernel queue never backs up behind a slow Sink.
func (w *Watcher) flush(ctx context.Context) {
	for _, k := range w.pend.take(w.now()) {
		if ctx.Err() != nil {
			return
		}
		w.process(ctx, k)
		w.drain(ctx)
	}
}

func (w *Watcher) drain(ctx context.Context) {
	for {
		select {
		case ev, ok := <-w.fsw.Events:
			if !ok {
				return
			}
			w.onEvent(ev)
		case err, ok := <-w.fsw.Errors:
			if !ok {
				return
			}
			w.onError(ctx, err)
		default:
			return
		}
	}
}

// walk adds watches for dir (and, for a recursive source, its subfolders)
// and returns the source's files found there, relative to the source.
func (w *Watcher) walk(src *source, dir string) []string {
	var found []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			if p == dir {
				return err
			}
			w.log.Warn("cannot read folder", "path", p, "err", err)
			if d != nil && d.IsDir() {
				return fs.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			if p != src.abs && !src.Recursive {
				return fs.SkipDir
			}
			if !w.watched[p] {
				if err := w.fsw.Add(p); err != nil {
					w.log.Warn("cannot watch folder; relying on rescans", "path", p, "err", err)
				} else {
					w.watched[p] = true
				}
			}
			return nil
		}
		if rel, ok := relTo(src.abs, p); ok && src.match(rel) {
			found = append(found, rel)
		}
		return nil
	})
	if err != nil {
		w.log.Warn("cannot scan folder", "path", dir, "err", err)
	}
	return found
}

// initialScan watches every folder, then schedules every file found and
// every file with a saved state, and sizes the backfill.
func (w *Watcher) initialScan() {
	now := w.now()
	var files int
	var bytes int64
	for i, src := range w.srcs {
		for _, rel := range w.walk(src, src.abs) {
			k := fileKey{src: i, rel: rel}
			t := w.files[k]
			if t == nil {
				t = newTracked(src, k)
				w.files[k] = t
			}
			if fi, err := os.Stat(t.abs); err == nil && fi.Mode().IsRegular() {
				left := fi.Size() - t.state.Offset
				if left < 0 { // shrank while we were away: read again from 0
					left = fi.Size()
				}
				if left > 0 {
					t.backfill, t.backfillLeft = true, left
					files++
					bytes += left
				}
			}
		}
	}
	for k := range w.files {
		w.pend.schedule(k, now)
	}
	w.prog.start(files, bytes)
}

// rescan looks at every folder for files whose size, time or inode moved
// since they were last read, and for known files that vanished.
func (w *Watcher) rescan() {
	now := w.now()
	seen := make(map[fileKey]bool)
	for i, src := range w.srcs {
		for _, rel := range w.walk(src, src.abs) {
			k := fileKey{src: i, rel: rel}
			seen[k] = true
			t := w.files[k]
			if t == nil {
				w.pend.event(k, 0, now, time.Time{})
				continue
			}
			fi, err := os.Stat(t.abs)
			if err != nil || statID(fi) != t.seen {
				w.pend.event(k, 0, now, t.retryAt)
			}
		}
	}
	for k, t := range w.files {
		if !seen[k] && !t.gone {
			w.pend.event(k, 0, now, t.retryAt)
		}
	}
}

func (w *Watcher) notice(ctx context.Context, t *tracked, n Notice) {
	if t != nil {
		src := w.srcs[t.key.src]
		n.Model, n.Path = src.Model, t.key.rel
		if n.Generation == 0 {
			n.Generation = t.state.Generation
		}
		if t.blocked {
			if d, ok := t.noticed[n.Kind]; ok && d == n.Detail {
				return // already said while the file is blocked
			}
			if t.noticed == nil {
				t.noticed = make(map[NoticeKind]string)
			}
			t.noticed[n.Kind] = n.Detail
		}
	}
	level := slog.LevelInfo
	if n.Kind == Error || n.Kind == HeaderChanged || n.Kind == Symlink || n.Kind == HardLink || n.Kind == Overflow {
		level = slog.LevelWarn
	}
	w.log.Log(ctx, level, n.Detail, "model", n.Model, "path", n.Path, "kind", n.Kind.String(), "generation", n.Generation)
	w.sink.Notice(ctx, n)
}

// relTo returns p relative to root with '/', if p is strictly inside root.
func relTo(root, p string) (string, bool) {
	r, err := filepath.Rel(root, p)
	if err != nil || r == "." || r == ".." || strings.HasPrefix(r, ".."+string(filepath.Separator)) {
		return "", false
	}
	return filepath.ToSlash(r), true
}

// within reports whether p is root or inside it.
func within(root, p string) bool {
	if p == root {
		return true
	}
	r, err := filepath.Rel(root, p)
	return err == nil && r != ".." && !strings.HasPrefix(r, ".."+string(filepath.Separator)) && !filepath.IsAbs(r)
}

// decoderFor builds the decoder of t from its committed state.
func (w *Watcher) decoderFor(t *tracked) (*decode.Decoder, error) {
	src := w.srcs[t.key.src]
	d := decode.NewDecoder(t.key.rel, src.Dialect)
	d.MaxRecordBytes = w.cfg.MaxRecordBytes
	if len(t.state.Header) > 0 {
		line := t.state.HeaderLine
		if err := d.SetHeader(t.state.Header, line); err != nil {
			return nil, err
		}
	}
	if err := d.Select(src.Numeric, src.Text); err != nil {
		return nil, err
	}
	d.SetOffset(t.state.Offset, t.state.Line)
	return d, nil
}

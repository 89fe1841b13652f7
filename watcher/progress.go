package watcher

import (
	"log/slog"
	"os"
	"time"

	"github.com/schollz/progressbar/v3"
	"golang.org/x/term"
)

// progressLogEvery is the interval of progress lines when stderr is not a
// terminal.
const progressLogEvery = 5 * time.Second

// progress tracks the backfill and reports it through Config.Progress, a
// terminal bar or log lines. It is used by the watcher's goroutine only.
type progress struct {
	cb   func(Progress)
	log  *slog.Logger
	bar  *progressbar.ProgressBar
	p    Progress
	last time.Time
	off  bool
	tty  bool
}

func newProgress(cfg Config, log *slog.Logger) *progress {
	pr := &progress{cb: cfg.Progress, log: log, off: cfg.NoProgress && cfg.Progress == nil}
	if pr.cb == nil && !pr.off {
		pr.tty = term.IsTerminal(int(os.Stderr.Fd()))
	}
	return pr
}

func (pr *progress) start(files int, bytes int64) {
	pr.p = Progress{Files: files, Bytes: bytes, Done: files == 0}
	if pr.off {
		return
	}
	if pr.tty && files > 0 {
		pr.bar = progressbar.NewOptions64(bytes,
			progressbar.OptionSetWriter(os.Stderr),
			progressbar.OptionSetDescription("reading files present at start"),
			progressbar.OptionShowBytes(true),
			progressbar.OptionShowCount(),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionClearOnFinish(),
		)
	}
	if pr.cb == nil && !pr.tty && files > 0 {
		pr.log.Info("reading files present at start", "files", files, "bytes", bytes)
		pr.last = time.Now()
	}
	pr.report(true)
}

// advance adds n bytes; fileDone marks one more file caught up.
func (pr *progress) advance(n int64, fileDone bool) {
	if pr.p.Done {
		return
	}
	pr.p.BytesDone = min(pr.p.Bytes, pr.p.BytesDone+n)
	if fileDone {
		pr.p.FilesDone++
	}
	if pr.p.FilesDone >= pr.p.Files {
		pr.p.Done = true
		pr.p.BytesDone = pr.p.Bytes
	}
	pr.report(pr.p.Done)
}

func (pr *progress) report(force bool) {
	if pr.off {
		return
	}
	now := time.Now()
	switch {
	case pr.cb != nil:
		if force || now.Sub(pr.last) >= 100*time.Millisecond {
			pr.last = now
			pr.cb(pr.p)
		}
	case pr.bar != nil:
		_ = pr.bar.Set64(pr.p.BytesDone)
		if pr.p.Done {
			_ = pr.bar.Finish()
			pr.bar = nil
		}
	case !pr.tty && pr.p.Files > 0:
		if pr.p.Done {
			pr.log.Info("files present at start are read", "files", pr.p.Files, "bytes", pr.p.Bytes)
		} else if now.Sub(pr.last) >= progressLogEvery {
			pr.last = now
			pr.log.Info("reading files present at start", "files_done", pr.p.FilesDone, "files", pr.p.Files,
				"bytes_done", pr.p.BytesDone, "bytes", pr.p.Bytes)
		}
	}
}

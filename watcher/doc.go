// Package watcher tails folders of CSV files for plumb's models and hands
// each file's new records, in order and exactly once, to a [Sink].
//
// # Model
//
// A [Config] lists [Source]s, one per model: a folder, a file pattern,
// whether subfolders count, the CSV dialect and the columns to read (see
// package decode), and the saved read state of each file ([FileState],
// the watcher's mirror of the store's per-file record). For every
// (model, file) the watcher keeps a position: generation, byte offset and
// line. It reads from that position, decodes complete records, and calls
// Sink.Deliver with a [Batch] going from the saved position to a new one.
// Only when Deliver returns nil does the position move; after an error the
// same range is delivered again later, with exponential backoff between
// RetryMin and RetryMax. So a Sink that commits the records and the
// batch's end state (Batch.State) in one transaction sees every row once,
// across errors and restarts.
//
//	w, err := watcher.New(watcher.Config{Sources: []watcher.Source{{
//		Model:   "thermocouple-k",
//		Folder:  "/srv/rig3/out",
//		Pattern: "*.csv",
//		Numeric: []string{"emf_mv", "temp_c"},
//		States:  saved, // from the store, converted
//	}}}, sink, logger)
//	if err != nil { ... }          // wraps ErrConfig
//	go func() { errc <- w.Run(ctx) }()
//	...
//	w.Close()                      // cancels Run and waits for it
//
// # The Sink, for the pipeline
//
// Deliver and Notice are called from the watcher's one goroutine, never
// concurrently. While Deliver runs no file is read (events keep being
// gathered), so a slow Deliver slows reading but loses nothing.
//
// Deliver(ctx, b):
//   - b.Model, b.Path (relative to the folder, '/') and b.Generation name
//     the file; b.StartOffset/StartLine equal the saved Offset/Line (0/0
//     for a new file or a new generation); b.EndOffset/EndLine is the new
//     position. b.State() is the FileState to save with the rows.
//   - b.Records holds decoded records in file order. A record with Err set
//     is a bad row (file:line:column and cause): quarantine it, never drop
//     it silently. Other records carry Values in the order of
//     Source.Numeric and Text in the order of Source.Text, and Line for
//     provenance.
//   - A batch may have no records: it then records a header or skipped
//     comment/blank lines, or starts a generation. Save its state anyway.
//   - Return nil once stored. If the range was already stored (the store
//     says the offset does not advance), return nil too: the watcher may
//     repeat a batch after an error it got although the commit succeeded.
//     Any other error makes the watcher retry the same range later.
//   - ctx is Run's context; when it is cancelled, Deliver should give up.
//
// Notice(ctx, n) reports events that are not rows, per (Model, Path):
//   - Resaved: another file (new inode) stands at the path, and its bytes
//     up to the read position are the bytes already read (their SHA-256,
//     kept with the position as FileState.Digest, is the same): a save by
//     writing a new file and renaming it over the old one. Reading goes on
//     from the old position, same generation. The check costs one read of
//     the part already read (BenchmarkSameOldPart).
//   - Rotated: another file (new inode) stands at the path and the part
//     already read differs (or is shorter, or no digest was kept; n.Detail
//     says which); it is read from offset 0 as Generation+1. Truncated: the file shrank or its first
//     bytes (up to 1 KiB, the fingerprint) changed, as an O_TRUNC rewrite
//     does; likewise read again from 0 as Generation+1. Earlier rows stay.
//   - HeaderChanged: after a rotation or truncation the header is not the
//     one read before. The file is blocked (not read) until it changes
//     again; mark the model's file as blocked with n.Detail as reason.
//   - Blocked notices (HeaderChanged, and Error with n.Blocked) carry
//     n.Refused when the file has given the model no rows: a stray file
//     (another header, whose columns n.Detail lists; an unreadable
//     encoding such as UTF-16; a named pipe, socket or device, which is
//     never opened). Only that file is refused; the model goes on. Without
//     Refused the file gave rows before its header changed.
//   - Unblocked: the cause of a block went away (the file was removed, or
//     changed and now fits); clear what the block recorded.
//   - HardLink: the path is a second name (same device and inode) of a
//     file the source reads under its first name; skipped. When the first
//     name goes, the second continues from its position (as Moved).
//   - Deleted: the file is gone; its history stays. A file that appears
//     again at the path is a rotation. A saved file missing at start is
//     reported too (so again after each restart).
//   - Moved: a new path is a known file renamed (same inode and first
//     bytes); it continues from the old position, so nothing is read twice.
//     Its batches then carry the new Path.
//   - Symlink: a link leading outside the folder, or to a file the source
//     reads under its own name (which would double its rows); skipped.
//   - Error: the file cannot be read or decoded: a bad header, a selected
//     column missing from the header (n.Err is a *decode.ColumnError naming
//     it and the header's columns), not a regular file: these block the
//     file until it changes (n.Blocked). An I/O error (n.Blocked false) is
//     passing: the file is tried again on its next event or rescan.
//   - Overflow (no Model/Path): the kernel dropped events; everything is
//     rescanned, nothing is lost.
//
// While a file is blocked each kind of notice is given once.
//
// # What is read, and when
//
// Run first watches every folder, then reads the files already there (the
// backfill; progress goes to Config.Progress, or a bar on a terminal
// stderr, or log lines), then follows fsnotify events:
//
//   - Events are merged per file and the file is read once per Debounce
//     window (default 50 ms), however many appends happened in it; a batch
//     holds at most MaxBatchBytes, and a long backlog is read in turns with
//     the other files.
//   - A last line without its newline is not consumed until the newline
//     arrives, or until the file has not changed for IdleFlush (default
//     30 s); then it is taken as the final record. If the writer later
//     continues that line, the continuation is read as a new (probably
//     bad) row.
//   - A file renamed into the folder gives only a Create event and is read
//     as a new file. A new subfolder of a recursive source is watched and
//     scanned at once (files in it give no events of their own until then).
//   - Names starting with '.' are ignored (temporary files of atomic
//     writers and editors).
//   - Every Rescan interval (default 30 s), and after an overflow, the
//     folders are walked and files whose size, time or inode moved are
//     read: a safety net for missed events.
//
// Files are opened read-only and never changed. A symbolic link is
// followed only if its resolved target lies inside the (resolved) folder
// and is not itself one of the source's files.
// Several models may read the same files; each (model, file) has its own
// position.
//
// A rewrite that keeps the first 1 KiB identical and does not shrink below
// the read position cannot be told from an append; such files should be
// replaced by rename (a new inode) instead.
package watcher

package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
	"time"

	"plumb/store"
)

func init() {
	register(command{name: "audit", summary: "check the audit trail's hash chain, or write it out for an auditor", run: runAudit})
}

const auditUsage = `Audit works on the audit trail of the state database: the append-only
record of every decision and every change of an alert's state, each record
chained to the one before by a SHA-256 hash.

  plumb audit verify --config FILE [--kept SEQ:HASH]
      walks the whole chain and reports the first break: a record edited,
      deleted, or moved. It prints the last record's number and hash: keep
      them apart from the database (a signed note, the quality office), as
      only they show that records were cut from the end; --kept checks such
      a pair, given as printed ("412:9f3a..."). Exit 0 when the chain is
      intact, 1 when it is broken.

  plumb audit export --config FILE [--from TIME] [--to TIME] [--format csv|json] [--out FILE]
      writes the records of a period [from, to) as CSV or JSON, every field
      as stored, so that each hash can be recomputed from the file.`

func runAudit(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "audit", "verify|export [flags]", auditUsage)
	path := fs.String("config", "plumb.toml", "the configuration `file`")
	from := fs.String("from", "", "export records at or after `TIME`")
	to := fs.String("to", "", "export records before `TIME`")
	format := fs.String("format", "csv", "export format: csv or json")
	out := fs.String("out", "", "write the export to `FILE` (default: standard output)")
	kept := fs.String("kept", "", "verify: a record number and hash kept apart, as `SEQ:HASH`")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 || (pos[0] != "verify" && pos[0] != "export") {
		fs.Usage()
		return fmt.Errorf("audit: %w: want \"plumb audit verify\" or \"plumb audit export\"", errUsage)
	}
	_, s, err := openState(ctx, *path)
	if err != nil {
		return err
	}
	defer s.Close()
	dec, ok := s.(store.Decisions)
	if !ok {
		return fmt.Errorf("audit: the state database keeps no audit trail")
	}
	if pos[0] == "verify" {
		var seq int64
		var hash string
		if *kept != "" {
			n, h, ok := strings.Cut(*kept, ":")
			v, err := strconv.ParseInt(n, 10, 64)
			if !ok || err != nil || v < 1 || len(h) != 64 {
				return fmt.Errorf("audit verify: %w: --kept wants SEQ:HASH (a record number and its 64-digit hash), got %q", errUsage, *kept)
			}
			seq, hash = v, h
		}
		return auditVerify(ctx, e, dec, seq, hash)
	}
	if *format != "csv" && *format != "json" {
		return fmt.Errorf("audit export: %w: --format wants csv or json, got %q", errUsage, *format)
	}
	now := time.Now()
	var q store.AuditQuery
	for _, b := range []struct {
		flag, val string
		dst       *time.Time
	}{{"--from", *from, &q.From}, {"--to", *to, &q.To}} {
		if b.val == "" {
			continue
		}
		t, err := parseWhen(b.val, now)
		if err != nil {
			return fmt.Errorf("audit export: %w: %s: %v", errUsage, b.flag, err)
		}
		*b.dst = t
	}
	if !q.From.IsZero() && !q.To.IsZero() && !q.To.After(q.From) {
		return fmt.Errorf("audit export: %w: --to must come after --from", errUsage)
	}
	recs, err := dec.Audit(ctx, q)
	if err != nil {
		return err
	}
	w := e.stdout
	var f *os.File
	if *out != "" {
		if f, err = os.OpenFile(*out, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644); err != nil {
			return fmt.Errorf("audit export: %w", err)
		}
		w = f
	}
	err = writeAudit(w, *format, recs, q)
	if f != nil {
		if cerr := f.Close(); err == nil {
			err = cerr
		}
		if err == nil {
			fmt.Fprintf(e.stderr, "wrote %d audit records to %s\n", len(recs), *out)
		}
	}
	return err
}

func writeAudit(w io.Writer, format string, recs []store.AuditRecord, q store.AuditQuery) error {
	if format == "json" {
		return store.WriteAuditJSON(w, recs, q.From, q.To)
	}
	return store.WriteAuditCSV(w, recs)
}

func auditVerify(ctx context.Context, e *env, dec store.Decisions, keptSeq int64, keptHash string) error {
	rep, err := store.VerifyAudit(ctx, dec)
	if err != nil {
		return err
	}
	if rep.Break == nil && keptSeq > 0 {
		b, err := store.CheckKept(ctx, dec, keptSeq, keptHash)
		if err != nil {
			return err
		}
		if b != nil {
			fmt.Fprintf(e.stdout, "audit trail BROKEN at record %d (%s): %s\n", b.Seq, b.Kind, b.Detail)
			return &exitError{code: 1, err: fmt.Errorf("audit trail broken at record %d", b.Seq)}
		}
		fmt.Fprintf(e.stdout, "kept record %d is in the trail with its hash\n", keptSeq)
	}
	if rep.Break != nil {
		fmt.Fprintf(e.stdout, "audit trail BROKEN at record %d (%s): %s\n", rep.Break.Seq, rep.Break.Kind, rep.Break.Detail)
		if rep.Records > 0 {
			fmt.Fprintf(e.stdout, "records 1 to %d are intact; the last intact hash is %s\n", rep.Head.Seq, rep.Head.Hash)
		}
		return &exitError{code: 1, err: fmt.Errorf("audit trail broken at record %d", rep.Break.Seq)}
	}
	if rep.Records == 0 {
		fmt.Fprintln(e.stdout, "audit trail intact: no records yet")
		return nil
	}
	fmt.Fprintf(e.stdout, "audit trail intact: %d records\nlast record %d at %s: %d:%s\n", rep.Records, rep.Head.Seq,
		rep.Head.At.Local().Format(time.DateTime), rep.Head.Seq, rep.Head.Hash)
	fmt.Fprintln(e.stdout, "Keep the last record's number and hash apart from the database: only they show records cut from the end.")
	return nil
}

package store

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"strconv"
	"time"

	"plumb/engine"
)

// AuditColumns are the columns of WriteAuditCSV, in order.
var AuditColumns = []string{"seq", "at", "actor", "action", "model", "subject", "reason", "before", "after", "prev", "hash"}

// auditTime formats At for export: UTC, RFC 3339 with nanoseconds, which
// parses back to the same instant (the hash covers the unix nanoseconds).
func auditTime(t time.Time) string { return t.UTC().Format(time.RFC3339Nano) }

// WriteAuditCSV writes recs as CSV (RFC 4180) with a header row of
// AuditColumns. Every field is written exactly as stored, so an auditor
// can recompute each hash from the file.
func WriteAuditCSV(w io.Writer, recs []AuditRecord) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(AuditColumns); err != nil {
		return fmt.Errorf("write audit csv: %w", err)
	}
	for _, r := range recs {
		row := []string{strconv.FormatInt(r.Seq, 10), auditTime(r.At), r.Actor, r.Action, r.Model,
			r.Subject, r.Reason, r.Before, r.After, r.Prev, r.Hash}
		if err := cw.Write(row); err != nil {
			return fmt.Errorf("write audit csv: %w", err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("write audit csv: %w", err)
	}
	return nil
}

// AuditExport is the JSON document WriteAuditJSON writes.
type AuditExport struct {
	// From and To are the period asked for (RFC 3339; "" for open).
	From string `json:"from"`
	To   string `json:"to"`
	// Encoding describes how each hash is computed, for an auditor who
	// recomputes them.
	Encoding string           `json:"hash_encoding"`
	Caution  string           `json:"caution"`
	Records  []AuditExportRow `json:"records"`
}

// AuditExportRow is one record in the JSON export. Before and After are
// the stored JSON text, as strings, so that their exact bytes (which the
// hash covers) survive.
type AuditExportRow struct {
	Seq     int64  `json:"seq"`
	At      string `json:"at"`
	AtNanos int64  `json:"at_unix_nano"`
	Actor   string `json:"actor"`
	Action  string `json:"action"`
	Model   string `json:"model"`
	Subject string `json:"subject"`
	Reason  string `json:"reason"`
	Before  string `json:"before"`
	After   string `json:"after"`
	Prev    string `json:"prev"`
	Hash    string `json:"hash"`
}

// AuditHashEncoding explains AuditEncoding in words, for exports.
const AuditHashEncoding = "hash = SHA-256(\"plumb audit record v1\" 0x00, seq int64 big-endian, " +
	"at_unix_nano int64 big-endian, then actor, action, model, subject, reason, before, after " +
	"each as uvarint byte length + UTF-8 bytes, then the 32 bytes of prev); prev of the first record is 64 zeros"

// Caution is the note every export and report of decisions carries.
const Caution = engine.Caution

// WriteAuditJSON writes recs as one indented JSON document (AuditExport)
// for the period [from, to) (zero bounds are open).
func WriteAuditJSON(w io.Writer, recs []AuditRecord, from, to time.Time) error {
	doc := AuditExport{Encoding: AuditHashEncoding, Caution: Caution, Records: make([]AuditExportRow, len(recs))}
	if !from.IsZero() {
		doc.From = auditTime(from)
	}
	if !to.IsZero() {
		doc.To = auditTime(to)
	}
	for i, r := range recs {
		doc.Records[i] = AuditExportRow{Seq: r.Seq, At: auditTime(r.At), AtNanos: r.At.UnixNano(),
			Actor: r.Actor, Action: r.Action, Model: r.Model, Subject: r.Subject, Reason: r.Reason,
			Before: r.Before, After: r.After, Prev: r.Prev, Hash: r.Hash}
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(doc); err != nil {
		return fmt.Errorf("write audit json: %w", err)
	}
	return nil
}

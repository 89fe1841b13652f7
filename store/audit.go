package store

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"strings"
	"time"
)

// AuditRecord is one entry of the append-only audit trail: who did what,
// when, to which model and subject, why, and the state before and after.
//
// Records form a hash chain. Hash is the SHA-256 of the record's canonical
// encoding (AuditEncoding) followed by the previous record's hash (Prev; 32
// zero bytes for the first record), both in lower-case hex. An edited
// record no longer gives its Hash, a deleted or moved record breaks the
// link of the one after it, and VerifyAudit finds the first such break.
type AuditRecord struct {
	Seq    int64
	At     time.Time
	Actor  string
	Action string
	Model  string
	// Subject is what the action concerned: an alert id, a reading as
	// "path:line", a quiet period as "quiet:ID".
	Subject string
	Reason  string
	// Before and After are JSON documents of the subject's state before
	// and after the action ("" when there is none, e.g. Before of a new
	// quiet period). The hash covers their bytes exactly as stored.
	Before string
	After  string
	Prev   string
	Hash   string
}

// auditDomain starts every encoding, so that the hash of an audit record
// can never equal the hash of some other document.
const auditDomain = "plumb audit record v1\x00"

// ZeroHash is the Prev of the first record.
var ZeroHash = strings.Repeat("0", 64)

// AuditEncoding returns the canonical encoding of r that its hash covers:
// the domain string, Seq and At (UTC unix nanoseconds) as big-endian
// int64s, then Actor, Action, Model, Subject, Reason, Before and After,
// each as its length (uvarint) followed by its bytes. Prev and Hash are
// not part of it. The encoding is unambiguous: no two different records
// share it.
func AuditEncoding(r AuditRecord) []byte {
	b := make([]byte, 0, len(auditDomain)+16+len(r.Actor)+len(r.Action)+len(r.Model)+
		len(r.Subject)+len(r.Reason)+len(r.Before)+len(r.After)+7*binary.MaxVarintLen64)
	b = append(b, auditDomain...)
	b = binary.BigEndian.AppendUint64(b, uint64(r.Seq))
	b = binary.BigEndian.AppendUint64(b, uint64(r.At.UnixNano()))
	for _, s := range []string{r.Actor, r.Action, r.Model, r.Subject, r.Reason, r.Before, r.After} {
		b = binary.AppendUvarint(b, uint64(len(s)))
		b = append(b, s...)
	}
	return b
}

// AuditHash returns the hex SHA-256 of r's canonical encoding followed by
// the 32 bytes of prev (hex). A prev that is not 64 hex digits is hashed
// as given, so that a damaged link still gives a (wrong) hash rather than
// an error.
func AuditHash(r AuditRecord, prev string) string {
	h := sha256.New()
	h.Write(AuditEncoding(r))
	if p, err := hex.DecodeString(prev); err == nil && len(p) == sha256.Size {
		h.Write(p)
	} else {
		h.Write([]byte(prev))
	}
	return hex.EncodeToString(h.Sum(nil))
}

// Seal sets r.Seq, r.Prev and r.Hash for a record appended after the
// record last (last.Seq 0 and last.Hash "" for the first record). Backends
// call it inside the transaction that appends r.
func Seal(r AuditRecord, last AuditRecord) AuditRecord {
	r.Seq = last.Seq + 1
	r.Prev = last.Hash
	if r.Prev == "" {
		r.Prev = ZeroHash
	}
	r.Hash = AuditHash(r, r.Prev)
	return r
}

// Kinds of ChainBreak.
const (
	// BreakEdited: the record's content does not give its stored hash.
	BreakEdited = "edited"
	// BreakMissing: one or more sequence numbers are missing before the
	// record (records deleted).
	BreakMissing = "missing"
	// BreakMoved: the record's hash is that of its content under another
	// sequence number (records reordered, or deleted and renumbered).
	BreakMoved = "moved"
	// BreakLink: the record is intact but does not link to the record
	// before it (that one was changed and its hash recomputed, or records
	// were removed or moved).
	BreakLink = "link"
)

// ChainBreak is the first place where the audit trail is not intact.
type ChainBreak struct {
	Seq    int64  // the sequence number of the record where the chain breaks
	Kind   string // BreakEdited, BreakMissing, BreakMoved or BreakLink
	Detail string
}

func (b *ChainBreak) Error() string {
	return fmt.Sprintf("audit trail broken at record %d (%s): %s", b.Seq, b.Kind, b.Detail)
}

// AuditReport is the result of VerifyAudit.
type AuditReport struct {
	// Records is how many records were read (up to the break, if any).
	Records int64
	// Head is the last intact record: keep its Seq and Hash apart from the
	// database (print them, sign them, send them to the quality office)
	// to detect later the removal of records at the end of the trail,
	// which no chain can show by itself.
	Head AuditRecord
	// Break is the first break, nil when the chain is intact.
	Break *ChainBreak
}

// AuditSource is what VerifyAudit reads: the trail in chain order.
type AuditSource interface {
	Audit(ctx context.Context, q AuditQuery) ([]AuditRecord, error)
}

// VerifyAudit reads the whole trail from src, page by page, and checks
// that sequence numbers run 1, 2, 3, ..., that every record's Prev is the
// Hash of the record before it (ZeroHash for the first) and that every
// record's Hash is AuditHash of its content. It stops at the first break.
// The error is only for a failure to read.
func VerifyAudit(ctx context.Context, src AuditSource) (AuditReport, error) {
	const page = 1000
	var rep AuditReport
	prev := AuditRecord{Hash: ZeroHash}
	for {
		recs, err := src.Audit(ctx, AuditQuery{AfterSeq: prev.Seq, Limit: page})
		if err != nil {
			return rep, fmt.Errorf("verify audit trail: %w", err)
		}
		for _, r := range recs {
			if b := checkLink(prev, r); b != nil {
				rep.Break = b
				return rep, nil
			}
			rep.Records++
			rep.Head = r
			prev = r
		}
		if len(recs) < page {
			return rep, nil
		}
	}
}

// checkLink checks r as the record after prev.
func checkLink(prev, r AuditRecord) *ChainBreak {
	want := prev.Seq + 1
	switch {
	case r.Seq == want+1:
		return &ChainBreak{Seq: r.Seq, Kind: BreakMissing,
			Detail: fmt.Sprintf("record %d is missing (deleted)", want)}
	case r.Seq > want:
		return &ChainBreak{Seq: r.Seq, Kind: BreakMissing,
			Detail: fmt.Sprintf("records %d to %d are missing (deleted)", want, r.Seq-1)}
	case r.Seq < want:
		return &ChainBreak{Seq: r.Seq, Kind: BreakMoved,
			Detail: fmt.Sprintf("sequence number %d follows %d", r.Seq, prev.Seq)}
	}
	if AuditHash(r, r.Prev) != r.Hash {
		if s, found := movedFrom(r); found {
			return &ChainBreak{Seq: r.Seq, Kind: BreakMoved,
				Detail: fmt.Sprintf("the record stored as %d was written as record %d", r.Seq, s)}
		}
		return &ChainBreak{Seq: r.Seq, Kind: BreakEdited,
			Detail: "its content does not match its hash (the record was changed after it was written)"}
	}
	if r.Prev != prev.Hash {
		return &ChainBreak{Seq: r.Seq, Kind: BreakLink,
			Detail: fmt.Sprintf("it does not link to record %d (a record before it was changed and rehashed, removed or moved)", prev.Seq)}
	}
	return nil
}

// movedFrom looks for the sequence number under which r's content gives
// its stored hash: a record moved to another place in the trail. It tries
// numbers up to twice r.Seq plus a margin, once, at the first break only.
func movedFrom(r AuditRecord) (int64, bool) {
	limit := 2*r.Seq + 1000
	for s := int64(1); s <= limit; s++ {
		if s == r.Seq {
			continue
		}
		c := r
		c.Seq = s
		if AuditHash(c, c.Prev) == r.Hash {
			return s, true
		}
	}
	return 0, false
}

// BreakCut: a record whose number and hash were kept apart from the
// database is gone or different: records were cut from the end of the
// trail (or the trail was rewritten from some record on).
const BreakCut = "cut"

// CheckKept checks a record number and hash kept apart from the database
// (an AuditReport.Head printed earlier) against the trail: the record
// must still be there with the same hash. Together with VerifyAudit this
// detects records cut from the end, which no chain shows by itself. It
// returns nil when the record is there unchanged; the error is only for a
// failure to read.
func CheckKept(ctx context.Context, src AuditSource, seq int64, hash string) (*ChainBreak, error) {
	recs, err := src.Audit(ctx, AuditQuery{AfterSeq: seq - 1, Limit: 1})
	if err != nil {
		return nil, fmt.Errorf("check kept audit record %d: %w", seq, err)
	}
	switch {
	case len(recs) == 0 || recs[0].Seq != seq:
		return &ChainBreak{Seq: seq, Kind: BreakCut,
			Detail: fmt.Sprintf("record %d, whose hash was kept, is no longer in the trail (records cut from the end)", seq)}, nil
	case !strings.EqualFold(recs[0].Hash, hash):
		return &ChainBreak{Seq: seq, Kind: BreakCut,
			Detail: fmt.Sprintf("record %d has hash %s, the kept hash is %s (the trail was rewritten)", seq, recs[0].Hash, hash)}, nil
	}
	return nil, nil
}

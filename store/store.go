// Package store keeps plumb's history: every observation with its provenance
// (file, line, raw values) and its diagnostics at arrival, every fit, the
// later changes of each observation's verdict, the quarantine of rows that
// could not be read, the per-file read positions, and the alert ledger with
// its delivery outbox.
//
// The Store interface is what the rest of plumb uses. The SQLite
// implementation lives in the subpackage sqlite, the PostgreSQL one (a
// history shared by many daemons, with per-model leases and claimed
// deliveries) in postgres; backend opens the one a state setting names
// (a path or a URL), and transfer copies a history from one to the other.
// Both pass storetest; testdata/pg/cluster.sh starts a throwaway server
// for the PostgreSQL tests.
//
// Exactly-once ingest rests on one rule: the rows read from a file and the
// read position they advance to are committed in one transaction (Ingest).
// After a crash the daemon resumes from the stored position, so no row is
// lost and none is counted twice.
//
// Storage grows with rows ingested, not with rows x fits: an observation's
// diagnostics are stored once, at arrival; a refit stores the fit summary
// and only the verdicts that changed.
//
// A Store is safe for use by multiple goroutines.
package store

import (
	"context"
	"errors"
	"strings"
	"time"
	"unicode/utf8"

	"plumb/engine"
)

// ErrNotFound is returned (wrapped) when a requested record does not exist.
var ErrNotFound = errors.New("store: not found")

// Store is the history backend. Every method takes a context that bounds
// the call; errors name the operation that failed.
type Store interface {
	// Sources returns the read state of every file the model has read.
	Sources(ctx context.Context, model string) ([]Source, error)
	// Ingest commits, in one transaction, the batch's observations, its
	// quarantined rows and the source's new read state. It returns the ids
	// assigned to b.Observations, in order. If b.Source.Offset does not
	// advance past the stored offset for the same (model, path, generation),
	// or b.Source.Generation is below the stored one, Ingest stores nothing
	// and returns ErrStale (wrapped), so a batch delivered twice is never
	// counted twice. A higher generation (rotation) is accepted at any
	// offset.
	//
	// The store keeps the source's Rows and Quarantined totals itself (the
	// stored totals plus this batch's); the values in b.Source are ignored.
	// Observations and quarantined rows may leave Model, Path and
	// Generation zero, meaning those of b.Source; other values are an
	// error. Any error other than ErrStale also stores nothing.
	Ingest(ctx context.Context, b Batch) ([]int64, error)
	// Observations returns the model's observations in arrival order
	// (ascending id), starting after the id AfterID, at most Limit of them
	// (Limit <= 0: all). An unknown model or path gives no rows, not an
	// error.
	Observations(ctx context.Context, model string, q ObsQuery) ([]Observation, error)
	// ObservationAt returns one observation by model, file and line (from
	// the newest generation holding that line), or ErrNotFound (wrapped).
	ObservationAt(ctx context.Context, model, path string, line int) (Observation, error)
	// CountObservations returns how many observations the model holds.
	CountObservations(ctx context.Context, model string) (int64, error)

	// RecordFit stores a fit summary and the verdict changes it caused, in
	// one transaction, and returns the fit id. Each change's FitID is set to
	// that id; a change with a zero At takes f.At. A change of an
	// observation that is not f.Model's fails the whole call with
	// ErrNotFound (wrapped).
	RecordFit(ctx context.Context, f FitRecord, changes []VerdictChange) (int64, error)
	// Fits returns the model's fits, oldest first, at most limit (<= 0: all),
	// starting after the fit id afterID.
	Fits(ctx context.Context, model string, afterID int64, limit int) ([]FitRecord, error)
	// LatestFits returns the model's n most recent fits, oldest first
	// (n <= 0: all, as Fits). A backend reads only those n (an index on
	// model and id, read backwards), so the dashboard and the report can
	// chart the latest fits without paging through the whole history. An
	// unknown model gives no fits, not an error.
	LatestFits(ctx context.Context, model string, n int) ([]FitRecord, error)
	// CountFits returns how many fits the model has (0 for an unknown
	// model), without reading them.
	CountFits(ctx context.Context, model string) (int64, error)
	// LastFit returns the model's most recent fit, or ErrNotFound.
	LastFit(ctx context.Context, model string) (FitRecord, error)
	// VerdictChanges returns the verdict history of one observation, oldest
	// first (none when it never changed).
	VerdictChanges(ctx context.Context, obsID int64) ([]VerdictChange, error)
	// CurrentVerdicts returns the latest verdict of every observation of the
	// model that has one different from its arrival verdict, by obs id.
	CurrentVerdicts(ctx context.Context, model string) (map[int64]engine.Word, error)

	// Quarantined returns quarantined rows of the model (model "" for all),
	// newest last, paginated by id.
	Quarantined(ctx context.Context, model string, afterID int64, limit int) ([]QuarantineRow, error)
	// LatestQuarantined returns the n most recent quarantined rows of the
	// model (model "" for all), oldest first (n <= 0: all), reading only
	// those. An unknown model gives no rows, not an error.
	LatestQuarantined(ctx context.Context, model string, n int) ([]QuarantineRow, error)
	// CountQuarantined returns how many rows of the model (model "" for
	// all) are quarantined.
	CountQuarantined(ctx context.Context, model string) (int64, error)

	// SetModelState records the model's current state (waiting, judging,
	// blocked) with its reason.
	SetModelState(ctx context.Context, s ModelState) error
	// ModelStates returns the recorded state of every model.
	ModelStates(ctx context.Context) ([]ModelState, error)

	// Alert ledger and outbox.

	// PutAlert inserts or updates the alert with a.ID (an update keeps the
	// stored FirstSeen) and, in the same transaction, enqueues the given
	// deliveries; the store assigns their IDs. A delivery left zero takes
	// AlertID a.ID, State pending, CreatedAt now, and NextAttempt and
	// UpdatedAt equal to CreatedAt. A delivery whose non-empty EventID is
	// already enqueued for the same Route is skipped, so a retried PutAlert
	// never enqueues an event twice.
	//
	// a.Revision makes the write conditional: n >= 1 writes only when the
	// stored alert has revision n-1 (revision 1: when there is no stored
	// alert, or one of revision 0), and otherwise writes nothing and
	// returns ErrChanged (wrapped), so that a read-modify-write cannot
	// overwrite a change made in between (an acknowledgement by another
	// process). 0 writes unconditionally. Either way the stored revision
	// becomes one more than before (1 for a new alert).
	PutAlert(ctx context.Context, a AlertRecord, deliveries []Delivery) error
	// Alert returns one alert by id.
	Alert(ctx context.Context, id string) (AlertRecord, error)
	// Alerts lists alerts, newest first by LastSeen.
	Alerts(ctx context.Context, q AlertQuery) ([]AlertRecord, error)
	// DueDeliveries returns pending deliveries whose NextAttempt <= now,
	// oldest first (by NextAttempt, then ID), at most limit (<= 0: all).
	DueDeliveries(ctx context.Context, now time.Time, limit int) ([]Delivery, error)
	// UpdateDelivery stores a delivery's new status after an attempt:
	// State, Attempts, LastError, NextAttempt (kept when zero) and UpdatedAt
	// (now when zero), by d.ID; an unknown ID gives ErrNotFound (wrapped).
	UpdateDelivery(ctx context.Context, d Delivery) error
	// Deliveries lists deliveries (all states), for status: filter by state
	// ("" for all), newest first (by ID), at most limit (<= 0: all).
	Deliveries(ctx context.Context, state DeliveryState, limit int) ([]Delivery, error)

	// Close releases the store.
	Close() error
}

// ErrChanged is returned (wrapped) by PutAlert when the stored alert is
// not at the revision the write expects: it changed since it was read.
var ErrChanged = errors.New("store: the alert changed since it was read")

// ErrStale is returned (wrapped) by Ingest for a batch whose offset does
// not advance the stored read position.
var ErrStale = errors.New("store: batch does not advance the read position")

// Source is the read state of one file for one model.
type Source struct {
	Model string
	// Path is the file's path relative to the model's folder, with '/'.
	Path string
	// Generation counts rotations and truncations: each time the file is
	// found replaced or truncated, reading starts again at offset 0 with
	// Generation+1. Rows of earlier generations stay in the history.
	Generation int
	Inode      uint64
	// Size is the file size seen when Offset was reached.
	Size int64
	// Offset is the byte offset just past the last consumed record.
	Offset int64
	// Line is the number of the last line consumed (1-based; 0 before any).
	Line int
	// Fingerprint is a hash of the file's first bytes (up to 1 KiB) used to
	// tell a rewritten file from an appended one.
	Fingerprint string
	// FingerprintLen is how many bytes the fingerprint covers.
	FingerprintLen int
	// Header is the header row as read (column names), joined with '\x1f'.
	Header string
	// Digest is the serialised state of a SHA-256 over the bytes [0, Offset)
	// (encoding.BinaryMarshaler form), empty when not known. It lets the
	// watcher tell a file saved anew under the same name (a new inode)
	// that begins with the bytes already read from one that differs.
	Digest []byte
	// Rows and Quarantined count what this source has contributed;
	// Missing counts its rows left out for a missing value in a column
	// the model uses (Batch.Missing summed; migration 0006).
	Rows        int64
	Quarantined int64
	Missing     int64
	UpdatedAt   time.Time
}

// Batch is one commit unit of ingest.
type Batch struct {
	Source       Source
	Observations []Observation
	Quarantine   []QuarantineRow
	// Missing is the number of the batch's rows left out for a missing
	// value; the store adds it to the source's Missing in the same
	// transaction, so a row is never counted twice.
	Missing int64
}

// Observation is one accepted data row of one model.
type Observation struct {
	ID         int64
	Model      string
	Path       string
	Generation int
	Line       int
	// Raw is the record's text as it stood in the file (without the line
	// terminator).
	Raw string
	// Label is the text of the model's id column in the row (a serial
	// number, a sample id), "" when the model has none (migration 0006).
	// It is stored rather than derived from Raw again: the header and the
	// dialect a row was read with may have changed since.
	Label string
	// Values are the numbers the model uses: the response first, then each
	// predictor column in the model's column order.
	Values []float64
	// Time is the value of the model's timestamp column, if it has one.
	Time      time.Time
	ArrivedAt time.Time
	// Arrival holds the diagnostics computed when the row arrived, against
	// the fit that included it. Nil when the model was not yet judging.
	Arrival *Diagnostics
}

// Diagnostics are one observation's influence measures against one fit.
// Undefined values (for instance at leverage 1) are NaN.
type Diagnostics struct {
	Leverage            float64
	Residual            float64
	StudentizedInternal float64
	StudentizedExternal float64
	CooksDistance       float64
	DFFITS              float64
	DFBETAS             []float64
	COVRATIO            float64
	OutlierPBonferroni  float64
	// Verdict is the engine's word for the row's verdict.
	Verdict engine.Word
	// Flags are the cutoffs crossed, as the engine reports them (nil for
	// none). Their text (measure, family, term) is kept as UTF-8.
	Flags []engine.Flag
}

// ObsQuery selects observations.
type ObsQuery struct {
	AfterID int64
	Limit   int
	Path    string // "" for all files
}

// FitRecord is the summary of one fit.
type FitRecord struct {
	ID    int64
	Model string
	At    time.Time
	N     int
	P     int
	// Terms names the coefficients, "intercept" first when present.
	Terms     []string
	Estimates []float64
	StdErrors []float64
	Sigma     float64
	RSquared  float64
	// Fragility is the fragility index, or -1 when no removal of up to
	// FragilityK rows breaks a conclusion, or -2 when not computed.
	Fragility  int
	FragilityK int
	// Detail is a JSON document with whatever else the fit summary carries
	// (fragility detail, suggestions, largest Cook's distance).
	Detail string
	// LastObsID is the id of the newest observation included in the fit.
	LastObsID int64
}

// VerdictChange records that a refit changed an observation's verdict.
type VerdictChange struct {
	ObsID int64
	FitID int64
	At    time.Time
	// From is "" for an observation that arrived without a verdict.
	From engine.Word
	To   engine.Word
	// Flags are the cutoffs crossed under the new fit (nil for none).
	Flags []engine.Flag
}

// QuarantineRow is a row that could not be read, kept with its reason.
type QuarantineRow struct {
	ID         int64
	Model      string
	Path       string
	Generation int
	Line       int
	// Column is the byte column (1-based; 0 when the row as a whole is
	// refused), ColumnName and Field the name and 1-based position of
	// the column that could not be read ("" and 0 when not one column).
	Column     int
	ColumnName string
	Field      int
	Raw        string
	Reason     string
	// At is when the row arrived (was read and kept aside).
	At time.Time
}

// ModelState is a model's current state.
type ModelState struct {
	Model  string
	State  string // "waiting", "judging", "blocked"
	Reason string
	At     time.Time
}

// AlertRecord is one alert in the ledger. One alert exists per (Model,
// Kind, Subject); its updates change LastSeen, State and Doc.
type AlertRecord struct {
	ID        string
	Model     string
	Kind      string
	Subject   string
	Severity  string
	State     string // "open", "acknowledged", "resolved"
	FirstSeen time.Time
	LastSeen  time.Time
	// Doc is the alert's full JSON document as the alerts package made it.
	Doc string
	// Revision counts the alert's writes (see PutAlert).
	Revision int64
}

// AlertQuery selects alerts.
type AlertQuery struct {
	State   string // "" for all
	Model   string // "" for all
	Kind    string
	Subject string
	Limit   int
	Offset  int
}

// DeliveryState is the state of one outbox entry. It is a string, as
// the alert record's kind and state are, so that the alert ledger's own
// types (package alerts) convert to these directly.
type DeliveryState = string

const (
	DeliveryPending   DeliveryState = "pending"
	DeliveryDelivered DeliveryState = "delivered"
	DeliveryDead      DeliveryState = "dead"
)

// Delivery is one outbox entry: one alert event for one route.
type Delivery struct {
	ID          int64
	AlertID     string
	Route       string
	EventID     string
	Payload     []byte
	State       DeliveryState
	Attempts    int
	NextAttempt time.Time
	LastError   string
	CreatedAt   time.Time
	UpdatedAt   time.Time
}

// CopyFlags returns the copy of fs that a backend keeps: nil for none, and
// each text field as valid UTF-8 (an invalid byte becomes U+FFFD), so that
// every backend reads back the same flags (what encoding/json does to a
// string).
func CopyFlags(fs []engine.Flag) []engine.Flag {
	if len(fs) == 0 {
		return nil
	}
	out := make([]engine.Flag, len(fs))
	for i, f := range fs {
		f.Measure, f.Family, f.Term = validUTF8(f.Measure), validUTF8(f.Family), validUTF8(f.Term)
		out[i] = f
	}
	return out
}

// validUTF8 replaces each byte of s that is not part of valid UTF-8 by
// U+FFFD.
func validUTF8(s string) string {
	if utf8.ValidString(s) {
		return s
	}
	var b strings.Builder
	for _, r := range s { // an invalid byte comes as RuneError, width 1
		b.WriteRune(r)
	}
	return b.String()
}

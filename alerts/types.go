package alerts

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"time"

	"plumb/engine"
)

// Kind is the kind of an alert.
type Kind string

// The alert kinds.
const (
	KindSuspectPoint Kind = "suspect_point"
	KindFragileFit   Kind = "fragile_fit"
	KindDrift        Kind = "drift"
	KindBlocked      Kind = "blocked"
	// KindFormLapse: a check of the model form (lack of fit,
	// Durbin-Watson, Breusch-Pagan) is significant on consecutive
	// refreshes (form.go).
	KindFormLapse Kind = "form_lapse"
)

// Kinds lists every alert kind.
var Kinds = []Kind{KindSuspectPoint, KindFragileFit, KindDrift, KindBlocked, KindFormLapse}

// Valid reports whether k is a known kind.
func (k Kind) Valid() bool {
	switch k {
	case KindSuspectPoint, KindFragileFit, KindDrift, KindBlocked, KindFormLapse:
		return true
	}
	return false
}

func (k Kind) prefix() string {
	switch k {
	case KindSuspectPoint:
		return "sp"
	case KindFragileFit:
		return "ff"
	case KindDrift:
		return "dr"
	case KindBlocked:
		return "bl"
	case KindFormLapse:
		return "fl"
	}
	return "al"
}

// Severity ranks alerts: info < warning < critical.
type Severity string

// The severities.
const (
	SeverityInfo     Severity = "info"
	SeverityWarning  Severity = "warning"
	SeverityCritical Severity = "critical"
)

// Rank orders severities: 1 info, 2 warning, 3 critical, 0 for unknown.
func (s Severity) Rank() int {
	switch s {
	case SeverityInfo:
		return 1
	case SeverityWarning:
		return 2
	case SeverityCritical:
		return 3
	}
	return 0
}

// Valid reports whether s is a known severity.
func (s Severity) Valid() bool { return s.Rank() > 0 }

// State is an alert's lifecycle state.
type State string

// The lifecycle states.
const (
	StateOpen         State = "open"
	StateAcknowledged State = "acknowledged"
	StateResolved     State = "resolved"
)

// Transition names the event an alert update sends. It is the last part of
// the CloudEvents type, e.g. "org.plumb.alert.drift.opened".
type Transition string

// The transitions that send an event.
const (
	Opened       Transition = "opened"
	Reopened     Transition = "reopened"
	Reminder     Transition = "reminder"
	Acknowledged Transition = "acknowledged"
	Resolved     Transition = "resolved"
)

// ID returns the alert id for (model, kind, subject): the kind's prefix
// ("sp", "ff", "dr", "bl"), "-", and 16 hex digits of SHA-256 over the three
// joined by NUL bytes. The same triple always gives the same id.
func ID(model string, kind Kind, subject string) string {
	h := sha256.New()
	h.Write([]byte(model))
	h.Write([]byte{0})
	h.Write([]byte(kind))
	h.Write([]byte{0})
	h.Write([]byte(subject))
	return kind.prefix() + "-" + hex.EncodeToString(h.Sum(nil)[:8])
}

// PointSubject is the subject of a suspect-point alert: model + "/" + file
// (relative to the model's folder, with '/') + ":" + line, e.g.
// "bench-b/feed.csv:212".
func PointSubject(model, file string, line int) string {
	return model + "/" + file + ":" + strconv.Itoa(line)
}

// LabeledPointSubject is the subject of a suspect-point alert whose row
// has a label (the text of the model's id column):
// PointSubject + " [" + label + "]"; without a label, PointSubject.
func LabeledPointSubject(model, file string, line int, label string) string {
	s := PointSubject(model, file, line)
	if label != "" {
		s += " [" + label + "]"
	}
	return s
}

// SilenceSubject is the subject of the blocked alert for a silent feed:
// model + "/feed". A model that cannot be fitted has subject model.
func SilenceSubject(model string) string { return model + "/feed" }

// FileSubject is the subject of the blocked alert for one refused file of
// a model (see BlockedCondition.File): model + "/file:" + file.
func FileSubject(model, file string) string { return model + "/file:" + file }

// Values maps column names to numbers. In JSON a non-finite number (an
// undefined diagnostic, for instance at leverage 1) is null.
type Values map[string]float64

// MarshalJSON writes the map with non-finite values as null.
func (v Values) MarshalJSON() ([]byte, error) {
	if v == nil {
		return []byte("null"), nil
	}
	m := make(map[string]jsonNumber, len(v))
	for k, x := range v {
		m[k] = jsonNumber(x)
	}
	return json.Marshal(m)
}

// UnmarshalJSON reads null as NaN.
func (v *Values) UnmarshalJSON(b []byte) error {
	var m map[string]jsonNumber
	if err := json.Unmarshal(b, &m); err != nil {
		return err
	}
	if m == nil {
		*v = nil
		return nil
	}
	*v = make(Values, len(m))
	for k, x := range m {
		(*v)[k] = float64(x)
	}
	return nil
}

// jsonNumber is a float64 that is null in JSON when not finite.
type jsonNumber float64

func (n jsonNumber) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(f)
}

func (n *jsonNumber) UnmarshalJSON(b []byte) error {
	if bytes.Equal(bytes.TrimSpace(b), []byte("null")) {
		*n = jsonNumber(math.NaN())
		return nil
	}
	var f float64
	if err := json.Unmarshal(b, &f); err != nil {
		return err
	}
	*n = jsonNumber(f)
	return nil
}

// Measure is one quantity of an alert that crossed its cutoff. For a
// suspect point it is an engine.Flag as the engine made it (converted
// directly: Measure(f)), with Measure one of the engine's measure names,
// Family its cutoff family and Term the coefficient for DFBETAS. The other
// kinds name their own measures ("fragility_index", "drift_coefficient",
// "drift_prediction", "silence_seconds"). In JSON the measure's name is
// the key "name".
type Measure engine.Flag

type measureJSON struct {
	Name   string     `json:"name"`
	Family string     `json:"family,omitempty"`
	Term   string     `json:"term,omitempty"`
	Value  jsonNumber `json:"value"`
	Cutoff jsonNumber `json:"cutoff"`
}

// MarshalJSON writes the measure with non-finite numbers as null.
func (m Measure) MarshalJSON() ([]byte, error) {
	return json.Marshal(measureJSON{m.Measure, m.Family, m.Term, jsonNumber(m.Value), jsonNumber(m.Cutoff)})
}

// UnmarshalJSON reads null numbers as NaN.
func (m *Measure) UnmarshalJSON(b []byte) error {
	var j measureJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	*m = Measure{j.Name, j.Family, j.Term, float64(j.Value), float64(j.Cutoff)}
	return nil
}

// Suggestion says where in predictor space to collect more data: Text in
// words, At the point in the predictors' own units.
type Suggestion struct {
	Text string `json:"text"`
	At   Values `json:"at,omitempty"`
}

// Alert is one alert's document: what is stored in the ledger (as
// AlertRecord.Doc) and sent as the data of every event. Its JSON form is
// described by the schema at alerts/schema/alert.schema.json (SchemaJSON).
type Alert struct {
	ID        string    `json:"id"`
	Model     string    `json:"model"`
	Kind      Kind      `json:"kind"`
	Severity  Severity  `json:"severity"`
	State     State     `json:"state"`
	Subject   string    `json:"subject"`
	FirstSeen time.Time `json:"first_seen"`
	LastSeen  time.Time `json:"last_seen"`
	// Count is how many times the condition has been reported while the
	// alert existed (1 when opened).
	Count int `json:"count"`
	// Sequence counts the events sent for this alert; the event id is
	// ID + "-" + Sequence.
	Sequence int `json:"sequence"`
	// Event is the transition of the latest event ("opened", ...).
	Event      Transition `json:"event"`
	NotifiedAt time.Time  `json:"notified_at"`
	// Held is true when the latest event was not delivered because a
	// quiet period covered the model (Config.Quiet).
	Held bool `json:"held,omitempty"`

	// Summary is one line: what happened. Explanation says what happened
	// and why it matters, in plain words.
	Summary     string `json:"summary"`
	Explanation string `json:"explanation"`
	// Measures are the diagnostics that crossed their cutoffs.
	Measures   []Measure   `json:"measures"`
	Suggestion *Suggestion `json:"suggestion,omitempty"`
	Caution    string      `json:"caution"`

	// Exactly one of these carries the kind's detail.
	Point     *PointDetail     `json:"point,omitempty"`
	Fragility *FragilityDetail `json:"fragility,omitempty"`
	Drift     *DriftDetail     `json:"drift,omitempty"`
	Blocked   *BlockedDetail   `json:"blocked,omitempty"`
	Form      *FormDetail      `json:"form,omitempty"`

	Ack        *AckInfo        `json:"acknowledgement,omitempty"`
	Resolution *ResolutionInfo `json:"resolution,omitempty"`

	// History lists the alert's events, oldest first: opened, reopened,
	// acknowledged (by whom, with the note), resolved (by hand with the
	// note, or because the condition cleared). Consecutive reminders are
	// one entry with their Count and the time of the Last.
	History []HistoryEntry `json:"history,omitempty"`
	// URL is the alert's page on the dashboard, when the config names the
	// dashboard's public address (Config.DashboardURL).
	URL string `json:"url,omitempty"`
}

// HistoryEntry is one step of an alert's life.
type HistoryEntry struct {
	Event Transition `json:"event"`
	At    time.Time  `json:"at"`
	// By and Note: who acknowledged or resolved, and their note (for an
	// automatic resolution, Note says why the condition cleared).
	By   string `json:"by,omitempty"`
	Note string `json:"note,omitempty"`
	// Auto marks a resolution because the condition cleared.
	Auto bool `json:"auto,omitempty"`
	// Count and Last: reminders sent in a row (Count >= 1) and the last
	// one's time; zero for other events.
	Count int        `json:"count,omitempty"`
	Last  *time.Time `json:"last,omitempty"`
}

// maxHistory bounds History: beyond it the oldest entries after the
// first are dropped.
const maxHistory = 50

// record appends the event t at now to a's history.
func (a *Alert) record(t Transition, now time.Time) {
	if n := len(a.History); t == Reminder && n > 0 && a.History[n-1].Event == Reminder {
		h := &a.History[n-1]
		h.Count++
		last := now
		h.Last = &last
		return
	}
	e := HistoryEntry{Event: t, At: now}
	switch t {
	case Reminder:
		e.Count = 1
	case Acknowledged:
		if a.Ack != nil {
			e.By, e.Note = a.Ack.By, a.Ack.Note
		}
	case Resolved:
		if a.Resolution != nil {
			e.Note, e.Auto = a.Resolution.Note, a.Resolution.Auto
		}
	}
	a.History = append(a.History, e)
	if len(a.History) > maxHistory {
		a.History = append(a.History[:1], a.History[len(a.History)-maxHistory+1:]...)
	}
}

// PointDetail is the row behind a suspect-point alert.
type PointDetail struct {
	File string `json:"file"`
	Line int    `json:"line"`
	// Label is the row's id-column text (a serial number, a sample id).
	Label  string `json:"label,omitempty"`
	Values Values `json:"values"`
}

// FragilityDetail is the detail of a fragile-fit alert.
type FragilityDetail struct {
	Index      int      `json:"index"`
	Limit      int      `json:"limit"`
	Removed    []string `json:"removed"`
	Conclusion string   `json:"conclusion"`
	Before     string   `json:"before,omitempty"`
	After      string   `json:"after,omitempty"`
}

// DriftDetail is the detail of a drift alert.
type DriftDetail struct {
	Baseline string `json:"baseline"`
	// Measures lists every compared quantity, in band or not.
	Measures []DriftMeasure `json:"measures"`
}

// BlockedDetail is the detail of a blocked alert.
type BlockedDetail struct {
	Cause  string `json:"cause"`
	Reason string `json:"reason"`
	// LastData is when the feed last delivered a row (silence only).
	LastData *time.Time `json:"last_data,omitempty"`
	// Silence is the configured silence limit (silence only), e.g. "2h0m0s".
	Silence string `json:"silence,omitempty"`
}

// AckInfo records an acknowledgement.
type AckInfo struct {
	By   string    `json:"by"`
	Note string    `json:"note,omitempty"`
	At   time.Time `json:"at"`
}

// ResolutionInfo records how an alert was resolved.
type ResolutionInfo struct {
	At time.Time `json:"at"`
	// Auto is true when the condition cleared, false for a Resolve call.
	Auto bool   `json:"auto"`
	Note string `json:"note,omitempty"`
	// By names who resolved it by hand (ResolveBy), or whose recorded
	// decision resolved it (a reading set aside, a re-baseline).
	By string `json:"by,omitempty"`
}

// fmtNum formats a number for explanations: 4 significant digits,
// "undefined" when not finite.
func fmtNum(x float64) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "undefined"
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}

func (a *Alert) String() string {
	return fmt.Sprintf("%s %s %s %s (%s)", a.ID, a.Kind, a.Severity, a.Subject, a.State)
}

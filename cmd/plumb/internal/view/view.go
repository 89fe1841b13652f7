// Package view defines what plumb shows to people: the read-only picture of
// every model (its state, its current fit, each observation's leverage and
// influence, the cutoffs they are judged against, the fragility of the fit,
// where to collect more data) and the alert ledger with its two actions,
// acknowledge and resolve.
//
// The daemon implements Source; the web server (package web) and the report
// writer (package report) consume it. Neither consumer computes statistics:
// every number in a view comes from the daemon, which got it from the
// engine. The consumers only lay the numbers out.
//
// # Numbers
//
// Diagnostics are undefined in places (leverage 1 gives a NaN studentized
// residual). Every float that can be undefined is a Float, which marshals a
// NaN or an infinity as JSON null instead of failing the whole response.
//
// # Pagination
//
// History lists (fits, observations, quarantine) are paged by id: pass the
// last id you saw as after (0 for the start) and a limit; a Source returns
// at most limit items in ascending id order. Alerts are paged by offset,
// newest first, as the alert ledger keeps them.
//
// # Caution
//
// plumb flags; it never deletes or alters a measurement. Every screen and report built
// from a view carries Caution.
package view

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"strconv"
	"time"

	"plumb/engine"
)

// Caution is the line every page, chart and report carries.
const Caution = engine.Caution

// Source is what the daemon offers to the web server and the report writer.
//
// A Source is safe for use by multiple goroutines. Every method takes a
// context that bounds the call. Methods that look up a model or an alert
// return an error wrapping ErrNotFound when it does not exist; Ack and
// Resolve return an error wrapping ErrState when the alert's state does not
// allow the action (resolving an already resolved alert, acknowledging a
// resolved one).
type Source interface {
	// Ready reports whether the daemon is serving: nil once the store is
	// open and the first scan of every model's folder is done.
	Ready(ctx context.Context) error

	// Models returns a summary of every configured model, ordered by name.
	Models(ctx context.Context) ([]ModelSummary, error)
	// Model returns the model's current picture: its fit, its points with
	// their diagnostics, the cutoffs, the fitted curves, fragility,
	// suggestions and drift bands.
	Model(ctx context.Context, name string) (ModelDetail, error)
	// Fits returns the model's fit history, oldest first, with ids greater
	// than after, at most limit (limit > 0; callers cap it).
	Fits(ctx context.Context, name string, after int64, limit int) ([]FitView, error)
	// Observations returns the model's accepted rows in arrival order,
	// with ids greater than after, at most limit.
	Observations(ctx context.Context, name string, after int64, limit int) ([]ObservationView, error)
	// Quarantine returns rows that could not be read, of one model (model
	// "" for all), with ids greater than after, at most limit.
	Quarantine(ctx context.Context, model string, after int64, limit int) ([]QuarantineView, error)

	// Alerts lists alerts newest first (by LastSeen) matching the filter.
	Alerts(ctx context.Context, f AlertFilter) ([]AlertView, error)
	// Alert returns one alert by id.
	Alert(ctx context.Context, id string) (AlertView, error)
	// Ack acknowledges an open alert: it stays in the ledger and is not
	// re-notified. who names the person (free text, may be empty).
	Ack(ctx context.Context, id, note, who string) error
	// Resolve closes an open or acknowledged alert by hand.
	Resolve(ctx context.Context, id, note string) error
}

// RecentFitter is an optional interface of a Source that can return the
// latest n fits of a model (oldest first) without paging through the
// whole history. The dashboard and report use it when present.
//
// n <= 0 asks for the whole history (as a limit of 0 does in the store).
// A model that does not exist gives an error wrapping ErrNotFound, as
// Fits does.
type RecentFitter interface {
	RecentFits(ctx context.Context, name string, n int) ([]FitView, error)
}

// RecentQuarantiner is an optional interface of a Source that can return
// the latest n quarantined rows of a model (model "" for all), in
// ascending id order like every list of a Source, without paging through
// the whole quarantine. The dashboard and report use it when present.
//
// n <= 0 asks for every row. Like Quarantine, a model that does not exist
// gives no rows.
type RecentQuarantiner interface {
	RecentQuarantine(ctx context.Context, model string, n int) ([]QuarantineView, error)
}

var (
	// ErrNotFound is wrapped by errors for a model or alert that does not exist.
	ErrNotFound = errors.New("view: not found")
	// ErrState is wrapped by Ack and Resolve when the alert's state does
	// not allow the action.
	ErrState = errors.New("view: action not allowed in the alert's state")
)

// Model states.
const (
	StateWaiting = "waiting" // fewer rows than the fit needs
	StateJudging = "judging" // fitted; new rows are judged
	StateBlocked = "blocked" // the fit fails (collinear, constant column, ...)
)

// Verdict words, as the engine gives them (engine.Word), in the string
// form the views carry.
const (
	VerdictOrdinary    = string(engine.WordOrdinary)
	VerdictNotable     = string(engine.WordNotable)
	VerdictOutlier     = string(engine.WordOutlier)
	VerdictInfluential = string(engine.WordInfluential)
	VerdictSuspect     = string(engine.WordSuspect) // outlier and influential
)

// Rank orders verdict words for listing, the most urgent first
// (engine.Word.Rank): suspect 4, outlier 3, influential 2, notable 1,
// anything else 0.
func Rank(verdict string) int { return engine.Word(verdict).Rank() }

// Alert states.
const (
	AlertOpen         = "open"
	AlertAcknowledged = "acknowledged"
	AlertResolved     = "resolved"
)

// ModelSummary is one line of the overview.
type ModelSummary struct {
	Name   string `json:"name"`
	State  string `json:"state"` // StateWaiting, StateJudging, StateBlocked
	Reason string `json:"reason,omitempty"`
	// Response, Terms (coefficient names, "intercept" first when present)
	// and Predictors (the distinct predictor columns) describe the model.
	Response    string   `json:"response"`
	Terms       []string `json:"terms"`
	Predictors  []string `json:"predictors"`
	Rows        int64    `json:"rows"`
	Quarantined int64    `json:"quarantined"`
	// Missing counts rows left out for a missing value in a column the
	// model uses (config missing): not quarantined, not in the fit.
	Missing int64 `json:"missing"`
	Fits    int64 `json:"fits"`
	// LastFitAt is zero before the first fit.
	LastFitAt  time.Time `json:"last_fit_at,omitzero"`
	Fragility  Fragility `json:"fragility"`
	OpenAlerts int       `json:"open_alerts"`
	// Suspects counts current points whose verdict is suspect.
	Suspects int `json:"suspects"`
	// MaxCook is the largest Cook's distance under the current fit (NaN
	// before the first fit).
	MaxCook Float `json:"max_cooks_distance"`
	// QuietUntil is set while a quiet period holds the model's alert
	// deliveries: when it ends.
	QuietUntil time.Time `json:"quiet_until,omitzero"`
	// SetAsideCount counts the readings set aside (left out of the fit).
	SetAsideCount int `json:"set_aside,omitempty"`
	// Owner is the daemon that runs the model when several share one
	// store (nil otherwise). Remote is true for a model this daemon does
	// not run: its summary is read from the shared history.
	Owner  *Owner `json:"owner,omitempty"`
	Remote bool   `json:"remote,omitempty"`
}

// Owner is the daemon running a model of a shared store: its host,
// process id and label (the config file it runs), and whether it is
// alive (holds the model now).
type Owner struct {
	Host  string `json:"host"`
	PID   int    `json:"pid"`
	Label string `json:"label,omitempty"`
	Alive bool   `json:"alive"`
}

// String gives "line2.example pid 4711", with " (gone)" when the owner
// no longer holds the model.
func (o Owner) String() string {
	s := o.Host + " pid " + strconv.Itoa(o.PID)
	if !o.Alive {
		s += " (gone)"
	}
	return s
}

// Fragility is the fragility index of the current fit: the smallest number
// of rows whose removal changes one of the fit's conclusions.
type Fragility struct {
	// Computed is false when the index was not computed (no fit yet, or
	// switched off).
	Computed bool `json:"computed"`
	// Found is false when no removal of up to K rows changes a conclusion.
	Found bool `json:"found"`
	// Index is the number of rows (1..K) when Found.
	Index int `json:"index,omitempty"`
	K     int `json:"k,omitempty"`
	// Conclusion says which conclusion breaks, e.g. "slope of dose is
	// positive" or "dose is significant at 0.05".
	Conclusion string `json:"conclusion,omitempty"`
	// Rows are the rows whose removal breaks it.
	Rows []RowRef `json:"rows,omitempty"`
	// Fragile is true when Index is at or below the configured limit
	// (the fragile_fit alert's condition); Limit is that limit.
	Fragile bool `json:"fragile,omitempty"`
	Limit   int  `json:"limit,omitempty"`
	// Searched says how the search was done ("exhaustive", "top 50
	// candidates", ...), as the engine reports it.
	Searched string `json:"searched,omitempty"`
}

// String gives "3", "no set of up to 5 rows changes a conclusion" or
// "not computed".
func (f Fragility) String() string {
	switch {
	case !f.Computed:
		return "not computed"
	case !f.Found:
		return "no set of up to " + strconv.Itoa(f.K) + " rows changes a conclusion"
	default:
		return strconv.Itoa(f.Index)
	}
}

// Alarming reports whether the fragility deserves attention: the fit is
// fragile (at or below the limit), or an index was found and no limit is
// known.
func (f Fragility) Alarming() bool {
	return f.Fragile || (f.Found && f.Limit == 0)
}

// RowRef points at one observation by provenance.
type RowRef struct {
	ID   int64  `json:"id"`
	File string `json:"file"`
	Line int    `json:"line"`
	// Label is the row's own name, the text of the model's id column (a
	// serial number, a sample id); "" when the model has none.
	Label string `json:"label,omitempty"`
}

// ModelDetail is the full picture of one model under its current fit.
type ModelDetail struct {
	ModelSummary
	// FitID and FitAt identify the current fit (0 and zero before the first).
	FitID int64     `json:"fit_id,omitempty"`
	FitAt time.Time `json:"fit_at,omitzero"`
	// N and P are the rows and coefficients of the current fit.
	N            int           `json:"n"`
	P            int           `json:"p"`
	Coefficients []Coefficient `json:"coefficients"`
	Sigma        Float         `json:"sigma"`
	RSquared     Float         `json:"r_squared"`
	AdjRSquared  Float         `json:"adj_r_squared"`
	// Points are the rows of the current fit in fit order (Row = 0..N-1).
	Points  []Point `json:"points"`
	Cutoffs Cutoffs `json:"cutoffs"`
	// Curves holds one fitted curve per predictor column, the other
	// predictors held at the values the curve names.
	Curves      []Curve      `json:"curves"`
	Suggestions []Suggestion `json:"suggestions"`
	// Drift holds the drift band of each coefficient (may be empty).
	Drift []DriftBand `json:"drift"`
	// Units gives the configured unit of a column by name (may be nil).
	Units map[string]string `json:"units,omitempty"`
	// Predictions and Inverse are the configured calibration answers
	// from the current fit (none when none are configured).
	Predictions []Prediction `json:"predictions,omitempty"`
	Inverse     []Inverse    `json:"inverse,omitempty"`
	// SetAside are the readings set aside by a recorded decision: left
	// out of the fit, shown hollow with who, when and why.
	SetAside []SetAsidePoint `json:"set_aside_points,omitempty"`
	// Rebaselines are the model's re-baseline events, oldest first.
	Rebaselines []RebaselineView `json:"rebaselines,omitempty"`

	// Weights is the fit's weighting in plumb's notation ("" unweighted);
	// Form its checks of the model form; Pool the poolability of its
	// group (form.go).
	Weights string `json:"weights,omitempty"`
	// FormLevel is the level the model judges its form checks at.
	FormLevel float64      `json:"form_level,omitempty"`
	Form      *FormChecks  `json:"form_checks,omitempty"`
	Pool      *Poolability `json:"poolability,omitempty"`
}

// Curve returns the curve over predictor, or false.
func (d *ModelDetail) Curve(predictor string) (Curve, bool) {
	for _, c := range d.Curves {
		if c.Predictor == predictor {
			return c, true
		}
	}
	return Curve{}, false
}

// Coefficient is one estimated coefficient with its 95 % interval.
type Coefficient struct {
	Term     string `json:"term"`
	Estimate Float  `json:"estimate"`
	StdError Float  `json:"std_error"`
	T        Float  `json:"t"`
	P        Float  `json:"p"`
	Lower95  Float  `json:"lower95"`
	Upper95  Float  `json:"upper95"`
}

// Point is one row of the current fit with its diagnostics.
type Point struct {
	ID   int64  `json:"id"`
	Row  int    `json:"row"` // 0-based position in the fit
	File string `json:"file"`
	Line int    `json:"line"`
	// Label is the row's id-column text ("" when the model has none).
	Label string `json:"label,omitempty"`
	// X holds the row's predictor values by column name.
	X map[string]Float `json:"x"`
	// Labels are the row's group labels (text columns), by column.
	Labels              map[string]string `json:"labels,omitempty"`
	Y                   Float             `json:"y"`
	Fitted              Float             `json:"fitted"`
	Residual            Float             `json:"residual"`
	Leverage            Float             `json:"leverage"`
	StudentizedExternal Float             `json:"studentized_external"`
	Cook                Float             `json:"cooks_distance"`
	DFFITS              Float             `json:"dffits"`
	BonferroniP         Float             `json:"bonferroni_p"`
	Verdict             string            `json:"verdict"`
	Flags               []Flag            `json:"flags,omitempty"`
}

// Flag is one cutoff a point crosses, the engine's flag converted
// directly (Flag(f)). In JSON: measure (leverage, cooks_distance, dffits,
// ...), family (absolute, size_adjusted, test), term (DFBETAS only), value
// and cutoff (null when undefined).
type Flag engine.Flag

type flagJSON struct {
	Measure string `json:"measure"`
	Family  string `json:"family"`
	Term    string `json:"term,omitempty"`
	Value   Float  `json:"value"`
	Cutoff  Float  `json:"cutoff"`
}

// Text says the flag in words (engine.Flag.Text): the one rendering of
// a crossed cutoff on every page, report and alert.
func (f Flag) Text() string { return engine.Flag(f).Text() }

// MarshalJSON implements json.Marshaler.
func (f Flag) MarshalJSON() ([]byte, error) {
	return json.Marshal(flagJSON{f.Measure, f.Family, f.Term, Float(f.Value), Float(f.Cutoff)})
}

// UnmarshalJSON implements json.Unmarshaler (null reads as NaN).
func (f *Flag) UnmarshalJSON(b []byte) error {
	var j flagJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	*f = Flag{j.Measure, j.Family, j.Term, float64(j.Value), float64(j.Cutoff)}
	return nil
}

// Cutoffs are the lines drawn on the diagnostic charts.
type Cutoffs struct {
	// Leverage is the high-leverage line, 2p/n.
	Leverage Float `json:"leverage"`
	// CookAbsolute is the absolute Cook's line (1, or the F(p, n-p)
	// median, as configured); CookSizeAdjusted is 4/n.
	CookAbsolute     Float `json:"cooks_absolute"`
	CookSizeAdjusted Float `json:"cooks_size_adjusted"`
	// TCritical is the Bonferroni critical |t|: the t(n-p-1) quantile at
	// 1 - Alpha/(2n). Points beyond ±TCritical are outliers.
	TCritical Float `json:"t_critical"`
	Alpha     Float `json:"alpha"`
}

// Curve is the fitted mean over one predictor with its 95 % confidence band.
type Curve struct {
	Predictor string `json:"predictor"`
	// Held gives the values at which the other predictors are held.
	Held  map[string]Float `json:"held,omitempty"`
	X     []Float          `json:"x"`
	Y     []Float          `json:"y"`
	Lower []Float          `json:"lower"`
	Upper []Float          `json:"upper"`
	// PredLower and PredUpper are the 95 % prediction interval of one
	// new reading at each X: where a new reading is expected to fall.
	PredLower []Float `json:"pred_lower"`
	PredUpper []Float `json:"pred_upper"`
}

// Suggestion is a place in predictor space where one more row would most
// improve the fit.
type Suggestion struct {
	At   map[string]Float `json:"at"`
	Text string           `json:"text"`
	// DGain is det(X'X) after one reading there over det(X'X) now:
	// 1 + d, where d = z'(X'X)^-1 z is the variance of the fitted value
	// there in units of sigma².
	DGain Float `json:"d_gain"`
	// Replicates is the number of readings proposed there (0: not said).
	Replicates int `json:"replicates,omitempty"`
}

// DriftBand is the baseline of one coefficient and the band outside which
// it counts as drifted.
type DriftBand struct {
	Term     string `json:"term"`
	Baseline Float  `json:"baseline"`
	Lower    Float  `json:"lower"`
	Upper    Float  `json:"upper"`
}

// FitView is one entry of the fit history.
type FitView struct {
	ID        int64     `json:"id"`
	At        time.Time `json:"at"`
	N         int       `json:"n"`
	P         int       `json:"p"`
	Terms     []string  `json:"terms"`
	Estimates []Float   `json:"estimates"`
	StdErrors []Float   `json:"std_errors"`
	Sigma     Float     `json:"sigma"`
	RSquared  Float     `json:"r_squared"`
	Fragility Fragility `json:"fragility"`
	MaxCook   Float     `json:"max_cooks_distance"`
	LastObsID int64     `json:"last_obs_id"`
	// Predictions and Inverse are the calibration answers recorded with
	// the fit (none when none were configured).
	Predictions []Prediction `json:"predictions,omitempty"`
	Inverse     []Inverse    `json:"inverse,omitempty"`
}

// Estimate returns the estimate of term and whether the fit has it.
func (f FitView) Estimate(term string) (Float, bool) {
	for i, t := range f.Terms {
		if t == term && i < len(f.Estimates) {
			return f.Estimates[i], true
		}
	}
	return NaN(), false
}

// ObservationView is one accepted row with its provenance and the verdict
// it has now.
type ObservationView struct {
	ID         int64  `json:"id"`
	File       string `json:"file"`
	Generation int    `json:"generation"`
	Line       int    `json:"line"`
	Raw        string `json:"raw"`
	// Label is the row's id-column text ("" when the model has none).
	Label string `json:"label,omitempty"`
	// Values are the response first, then each predictor column.
	Values    []Float   `json:"values"`
	Time      time.Time `json:"time,omitzero"`
	ArrivedAt time.Time `json:"arrived_at"`
	// ArrivalVerdict is the verdict at arrival ("" when the model was not
	// yet judging); Verdict is the current one.
	ArrivalVerdict string `json:"arrival_verdict,omitempty"`
	Verdict        string `json:"verdict,omitempty"`
	Leverage       Float  `json:"leverage"`
	Cook           Float  `json:"cooks_distance"`
	// StudentizedExternal is the externally studentized residual at arrival.
	StudentizedExternal Float `json:"studentized_external"`
	// SetAside is set while the reading is set aside (left out of fits).
	SetAside *SetAside `json:"set_aside,omitempty"`
}

// QuarantineView is a row that could not be read.
type QuarantineView struct {
	ID     int64  `json:"id"`
	Model  string `json:"model"`
	File   string `json:"file"`
	Line   int    `json:"line"`
	Column int    `json:"column"`
	// ColumnName and Field name the column that could not be read and
	// its 1-based position ("" and 0: not one column, or not known).
	ColumnName string    `json:"column_name,omitempty"`
	Field      int       `json:"field,omitempty"`
	Raw        string    `json:"raw"`
	Reason     string    `json:"reason"`
	At         time.Time `json:"at,omitzero"`
}

// AlertFilter selects alerts. Empty strings match all.
type AlertFilter struct {
	State  string
	Model  string
	Kind   string
	Limit  int
	Offset int
}

// AlertView is one alert of the ledger.
type AlertView struct {
	ID        string    `json:"id"`
	Model     string    `json:"model"`
	Kind      string    `json:"kind"` // suspect_point, fragile_fit, drift, blocked, form_lapse
	Severity  string    `json:"severity"`
	Subject   string    `json:"subject"`
	State     string    `json:"state"`
	FirstSeen time.Time `json:"first_seen"`
	LastSeen  time.Time `json:"last_seen"`
	// Summary is one human line.
	Summary string `json:"summary"`
	// Note and By are the last acknowledgement's or resolution's note and person.
	Note string `json:"note,omitempty"`
	By   string `json:"by,omitempty"`
	// Held is true when the alert's latest event was held by a quiet
	// period (stored, not delivered; the period's summary names it).
	Held bool `json:"held,omitempty"`
	// Doc is the alert's full JSON document as the alerts package made it.
	Doc json.RawMessage `json:"doc,omitempty"`
}

// Float is a float64 that marshals NaN and ±Inf as JSON null and reads
// null back as NaN.
type Float float64

// NaN returns a Float NaN.
func NaN() Float { return Float(math.NaN()) }

// Finite reports whether f is neither NaN nor infinite.
func (f Float) Finite() bool {
	return !math.IsNaN(float64(f)) && !math.IsInf(float64(f), 0)
}

// MarshalJSON implements json.Marshaler.
func (f Float) MarshalJSON() ([]byte, error) {
	return AppendJSON(nil, float64(f)), nil
}

// AppendJSON appends x as JSON: null when x is NaN or infinite (undefined),
// otherwise the shortest form that reads back as the same float64. It is
// the one rule for undefined numbers in plumb's JSON: the API, the report,
// the stored fit detail and inspect's JSON writer all use it.
func AppendJSON(dst []byte, x float64) []byte {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return append(dst, "null"...)
	}
	return strconv.AppendFloat(dst, x, 'g', -1, 64)
}

// UnmarshalJSON implements json.Unmarshaler.
func (f *Float) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*f = NaN()
		return nil
	}
	v, err := strconv.ParseFloat(string(b), 64)
	if err != nil {
		return err
	}
	*f = Float(v)
	return nil
}

// ThinPoints returns the points a chart should draw when there are more
// than max: every point whose verdict is not ordinary, and an evenly
// strided share of the ordinary ones, in their original order, so that the
// total is about max. dropped is how many ordinary points were left out.
// With len(pts) <= max (or max <= 0) it returns pts unchanged.
func ThinPoints(pts []Point, max int) (out []Point, dropped int) {
	if max <= 0 || len(pts) <= max {
		return pts, 0
	}
	flagged := 0
	for _, p := range pts {
		if p.Verdict != VerdictOrdinary && p.Verdict != "" {
			flagged++
		}
	}
	ordinary := len(pts) - flagged
	room := max - flagged
	if room < 0 {
		room = 0
	}
	out = make([]Point, 0, flagged+room)
	seen := 0
	for _, p := range pts {
		if p.Verdict != VerdictOrdinary && p.Verdict != "" {
			out = append(out, p)
			continue
		}
		// Keep ordinary point k when it starts a new stride bucket.
		if room > 0 && seen*room/ordinary != (seen+1)*room/ordinary {
			out = append(out, p)
		} else {
			dropped++
		}
		seen++
	}
	return out, dropped
}

package daemon

import (
	"context"
	"encoding/json"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"

	"plumb/cmd/plumb/internal/view"
	"plumb/store"
	"plumb/store/postgres"
)

// The fleet view: with a shared PostgreSQL store the daemon's view lists
// every model of the history, its own and those other daemons run (or
// ran), each with its owner. A model this daemon does not run is shown
// from the stored history: its counts, state, newest fit and open
// alerts; its fit and observation history page as usual. A daemon with
// no models configured serves the whole fleet this way.

// fleet returns the shared history's models by name (nil with SQLite).
func (v viewSource) fleet(ctx context.Context) (map[string]postgres.FleetModel, []string, error) {
	if v.d.pg == nil {
		return nil, nil, nil
	}
	fs, err := v.d.pg.Fleet(ctx)
	if err != nil {
		return nil, nil, err
	}
	out := make(map[string]postgres.FleetModel, len(fs))
	names := make([]string, len(fs))
	for i, f := range fs {
		out[f.Model] = f
		names[i] = f.Model
	}
	return out, names, nil
}

func ownerView(o *postgres.Ownership) *view.Owner {
	if o == nil {
		return nil
	}
	return &view.Owner{Host: o.Host, PID: o.PID, Label: o.Label, Alive: o.Alive}
}

// addFleet sets the owners of the daemon's own summaries and appends
// the summaries of the shared history's other models.
func (v viewSource) addFleet(ctx context.Context, own []view.ModelSummary) ([]view.ModelSummary, error) {
	fleet, names, err := v.fleet(ctx)
	if err != nil || fleet == nil {
		return own, err
	}
	mine := map[string]bool{}
	for i := range own {
		mine[own[i].Name] = true
		if f, ok := fleet[own[i].Name]; ok {
			own[i].Owner = ownerView(f.Owner)
		}
	}
	for _, name := range names {
		if !mine[name] {
			own = append(own, remoteSummary(fleet[name]))
		}
	}
	return own, nil
}

// remoteSummary is the overview line of a model another daemon runs.
func remoteSummary(f postgres.FleetModel) view.ModelSummary {
	s := view.ModelSummary{Name: f.Model, State: f.State.State, Reason: f.State.Reason, Rows: f.Rows,
		Quarantined: f.Quarantined, Fits: f.Fits, OpenAlerts: int(f.OpenAlerts + f.AcknowledgedAlerts),
		MaxCook: view.NaN(), Owner: ownerView(f.Owner), Remote: true}
	if s.State == "" {
		s.State = view.StateWaiting
	}
	if lf := f.LastFit; lf != nil {
		var detail struct {
			Response string `json:"response"`
		}
		if json.Unmarshal([]byte(lf.Detail), &detail) == nil {
			s.Response = detail.Response // the fleet's other daemons record it with each fit
		}
		s.LastFitAt = lf.At
		s.Fragility = fitView(*lf).Fragility
		s.Terms = lf.Terms
		if fv := fitView(*lf); !math.IsNaN(float64(fv.MaxCook)) {
			s.MaxCook = fv.MaxCook
		}
	}
	return s
}

// remoteDetail is the model page of a model another daemon runs: its
// summary and the newest stored fit's coefficients with their t, p and
// 95 % intervals (Student's t on N-P degrees of freedom); no points (the
// owner holds the current influence table).
func (v viewSource) remoteDetail(ctx context.Context, name string) (view.ModelDetail, bool, error) {
	fleet, _, err := v.fleet(ctx)
	if err != nil {
		return view.ModelDetail{}, false, err
	}
	f, ok := fleet[name]
	if !ok {
		return view.ModelDetail{}, false, nil
	}
	d := view.ModelDetail{ModelSummary: remoteSummary(f)}
	lf := f.LastFit
	if lf == nil {
		return d, true, nil
	}
	d.FitID, d.FitAt, d.N, d.P = lf.ID, lf.At, lf.N, lf.P
	d.Sigma, d.RSquared, d.AdjRSquared = view.Float(lf.Sigma), view.Float(lf.RSquared), view.NaN()
	if df := float64(lf.N - lf.P); df > 0 {
		d.AdjRSquared = view.Float(1 - (1-lf.RSquared)*float64(lf.N-1)/df)
	}
	d.Coefficients = storedCoefficients(*lf)
	return d, true, nil
}

// storedCoefficients rebuilds a coefficient table from a stored fit.
func storedCoefficients(f store.FitRecord) []view.Coefficient {
	df := float64(f.N - f.P)
	out := make([]view.Coefficient, 0, len(f.Terms))
	for i, t := range f.Terms {
		c := view.Coefficient{Term: t, Estimate: view.NaN(), StdError: view.NaN(), T: view.NaN(), P: view.NaN(),
			Lower95: view.NaN(), Upper95: view.NaN()}
		if i < len(f.Estimates) {
			c.Estimate = view.Float(f.Estimates[i])
		}
		if i < len(f.StdErrors) {
			c.StdError = view.Float(f.StdErrors[i])
		}
		est, se := float64(c.Estimate), float64(c.StdError)
		if df > 0 && se > 0 && !math.IsNaN(est) {
			dist := distuv.StudentsT{Mu: 0, Sigma: 1, Nu: df}
			tv := est / se
			q := dist.Quantile(0.975)
			c.T = view.Float(tv)
			c.P = view.Float(2 * dist.Survival(math.Abs(tv)))
			c.Lower95, c.Upper95 = view.Float(est-q*se), view.Float(est+q*se)
		}
		out = append(out, c)
	}
	return out
}

// exists checks that the view can show the model: configured here or,
// with a shared store, known to the history.
func (v viewSource) exists(ctx context.Context, name string) error {
	if _, err := v.model(name); err == nil {
		return nil
	} else if v.d.pg == nil {
		return err
	}
	fleet, _, err := v.fleet(ctx)
	if err != nil {
		return err
	}
	if _, ok := fleet[name]; !ok {
		return fmt.Errorf("model %q: %w", name, view.ErrNotFound)
	}
	return nil
}

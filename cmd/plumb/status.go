package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
	"time"

	"plumb/cmd/plumb/internal/config"
	"plumb/cmd/plumb/internal/view"
	"plumb/store"
	"plumb/store/backend"
)

func init() {
	register(command{
		name:    "status",
		summary: "show each model's state, rows, fits and fragility, and each file's position",
		run:     runStatus,
	})
	register(command{
		name:    "history",
		summary: "show how a model's fit, or one observation's verdict, evolved",
		run:     runHistory,
	})
}

// openState opens the config's state database for reading by a command
// that runs beside the daemon (SQLite in WAL mode allows it).
func openState(ctx context.Context, path string) (*config.Config, store.Store, error) {
	cfg, err := loadConfig(path)
	if err != nil {
		return nil, nil, &exitError{code: 1, err: err}
	}
	p := cfg.Resolve(cfg.State)
	if err := stateReady(p); err != nil {
		return nil, nil, err
	}
	db, err := backend.Open(ctx, p)
	if err != nil {
		return nil, nil, err
	}
	return cfg, db, nil
}

type statusModel struct {
	Name        string  `json:"name"`
	State       string  `json:"state"`
	Reason      string  `json:"reason,omitempty"`
	Rows        int64   `json:"rows"`
	Quarantined int64   `json:"quarantined"`
	Missing     int64   `json:"missing"` // rows left out for a missing value
	Fits        int     `json:"fits"`
	LastFit     *fitOut `json:"last_fit,omitempty"`
	Fragility   *int    `json:"fragility"`
	// Owner is the daemon running the model, with a shared store.
	Owner *ownerOut `json:"owner,omitempty"`
}

type fitOut struct {
	ID        int64                 `json:"id"`
	At        time.Time             `json:"at"`
	N         int                   `json:"n"`
	Sigma     view.Float            `json:"sigma"`
	RSquared  view.Float            `json:"r_squared"`
	Estimates map[string]view.Float `json:"estimates"`
	StdErrors map[string]view.Float `json:"std_errors"`
	Fragility *int                  `json:"fragility"`
}

type statusFile struct {
	Model       string `json:"model"`
	Path        string `json:"path"`
	Generation  int    `json:"generation"`
	Rows        int64  `json:"rows"`
	Quarantined int64  `json:"quarantined"`
	Missing     int64  `json:"missing"`
	Offset      int64  `json:"offset"`
	Line        int    `json:"line"`
}

type statusDelivery struct {
	ID        int64  `json:"id"`
	AlertID   string `json:"alert_id"`
	Route     string `json:"route"`
	State     string `json:"state"`
	Attempts  int    `json:"attempts"`
	LastError string `json:"last_error,omitempty"`
}

type statusOut struct {
	Models     []statusModel    `json:"models"`
	Files      []statusFile     `json:"files"`
	Deliveries []statusDelivery `json:"undelivered"`
}

func fitOutOf(f store.FitRecord) *fitOut {
	o := &fitOut{ID: f.ID, At: f.At, N: f.N, Sigma: view.Float(f.Sigma), RSquared: view.Float(f.RSquared),
		Estimates: map[string]view.Float{}, StdErrors: map[string]view.Float{}, Fragility: fragPtr(f.Fragility)}
	for i, t := range f.Terms {
		if i < len(f.Estimates) {
			o.Estimates[t] = view.Float(f.Estimates[i])
		}
		if i < len(f.StdErrors) {
			o.StdErrors[t] = view.Float(f.StdErrors[i])
		}
	}
	return o
}

// fragPtr maps the stored fragility to JSON: a number, or null when no
// removal breaks a conclusion or it was not computed.
func fragPtr(v int) *int {
	if v < 0 {
		return nil
	}
	return &v
}

func runStatus(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "status", "--config FILE [--json]",
		"Status shows, for each model, its state (waiting for rows, judging, blocked and why),\n"+
			"rows accepted and quarantined, fits, the last fit and its fragility; for each file its\n"+
			"read position; and alert deliveries that are pending or dead-lettered.")
	path := fs.String("config", "plumb.toml", "the configuration `file`")
	asJSON := fs.Bool("json", false, "print JSON")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	cfg, db, err := openState(ctx, *path)
	if err != nil {
		return err
	}
	defer db.Close()
	states, err := db.ModelStates(ctx)
	if err != nil {
		return err
	}
	stateOf := map[string]store.ModelState{}
	for _, s := range states {
		stateOf[s.Model] = s
	}
	names, owners, err := fleetNames(ctx, cfg, db)
	if err != nil {
		return err
	}
	var out statusOut
	for _, name := range names {
		m := struct{ Name string }{name}
		sm := statusModel{Name: m.Name, State: "waiting", Owner: owners[name]}
		if s, ok := stateOf[m.Name]; ok {
			sm.State, sm.Reason = s.State, s.Reason
		}
		if sm.Rows, err = db.CountObservations(ctx, m.Name); err != nil {
			return err
		}
		if sm.Quarantined, err = db.CountQuarantined(ctx, m.Name); err != nil {
			return err
		}
		fits, err := db.Fits(ctx, m.Name, 0, 0)
		if err != nil {
			return err
		}
		sm.Fits = len(fits)
		if len(fits) > 0 {
			sm.LastFit = fitOutOf(fits[len(fits)-1])
			sm.Fragility = sm.LastFit.Fragility
		}
		out.Models = append(out.Models, sm)
		srcs, err := db.Sources(ctx, m.Name)
		if err != nil {
			return err
		}
		for _, s := range srcs {
			out.Files = append(out.Files, statusFile{Model: m.Name, Path: s.Path, Generation: s.Generation, Rows: s.Rows, Quarantined: s.Quarantined, Missing: s.Missing, Offset: s.Offset, Line: s.Line})
			out.Models[len(out.Models)-1].Missing += s.Missing
		}
	}
	for _, st := range []store.DeliveryState{store.DeliveryPending, store.DeliveryDead} {
		ds, err := db.Deliveries(ctx, st, 100)
		if err != nil {
			return err
		}
		for _, d := range ds {
			out.Deliveries = append(out.Deliveries, statusDelivery{ID: d.ID, AlertID: d.AlertID, Route: d.Route, State: string(d.State), Attempts: d.Attempts, LastError: d.LastError})
		}
	}
	if *asJSON {
		return writeJSON(e.stdout, out)
	}
	tw := tabwriter.NewWriter(e.stdout, 2, 4, 2, ' ', 0)
	head := "MODEL\tSTATE\tROWS\tQUARANTINED\tMISSING\tFITS\tLAST FIT\tFRAGILITY"
	if owners != nil {
		head += "\tOWNER"
	}
	fmt.Fprintln(tw, head)
	// The fleet may list models this config does not have: their search
	// depth is not known here.
	maxRemoved := map[string]int{}
	for _, mc := range cfg.Models {
		maxRemoved[mc.Name] = mc.Fragility.MaxRemoved
	}
	for _, m := range out.Models {
		last, frag := "-", "-"
		if m.LastFit != nil {
			last = fmt.Sprintf("n=%d sigma=%.4g R²=%.4f at %s", m.LastFit.N, m.LastFit.Sigma, m.LastFit.RSquared, m.LastFit.At.Local().Format(time.DateTime))
			frag = "no set of rows searched changes a conclusion"
			if k, ok := maxRemoved[m.Name]; ok {
				frag = fmt.Sprintf("no set of up to %d rows changes a conclusion", k)
			}
			if m.Fragility != nil {
				frag = fmt.Sprint(*m.Fragility)
			}
		}
		owner := ""
		if owners != nil {
			owner = "\t" + m.Owner.String()
		}
		fmt.Fprintf(tw, "%s\t%s\t%d\t%d\t%d\t%d\t%s\t%s%s\n", m.Name, m.State, m.Rows, m.Quarantined, m.Missing, m.Fits, last, frag, owner)
		if m.Reason != "" {
			fmt.Fprintf(tw, "\t  %s\n", m.Reason)
		}
	}
	fmt.Fprintln(tw)
	fmt.Fprintln(tw, "FILE\tMODEL\tGEN\tROWS\tQUARANTINED\tMISSING\tOFFSET\tLINE")
	for _, f := range out.Files {
		fmt.Fprintf(tw, "%s\t%s\t%d\t%d\t%d\t%d\t%d\t%d\n", f.Path, f.Model, f.Generation, f.Rows, f.Quarantined, f.Missing, f.Offset, f.Line)
	}
	if len(out.Deliveries) > 0 {
		fmt.Fprintln(tw)
		fmt.Fprintln(tw, "UNDELIVERED\tROUTE\tSTATE\tATTEMPTS\tLAST ERROR")
		for _, d := range out.Deliveries {
			fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%s\n", d.AlertID, d.Route, d.State, d.Attempts, d.LastError)
		}
	}
	return tw.Flush()
}

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

func runHistory(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "history", "--config FILE MODEL [--line FILE:LINE] [--json]",
		"History shows how a model's coefficients, sigma, R² and fragility evolved fit by fit,\n"+
			"or, with --line, one observation's diagnostics at arrival and every later change of\n"+
			"its verdict.")
	path := fs.String("config", "plumb.toml", "the configuration `file`")
	line := fs.String("line", "", "one observation, as `FILE:LINE` (file relative to the model's folder)")
	asJSON := fs.Bool("json", false, "print JSON")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return usageErr("history", "name one model")
	}
	model := pos[0]
	cfg, db, err := openState(ctx, *path)
	if err != nil {
		return err
	}
	defer db.Close()
	known := false
	for _, m := range cfg.Models {
		known = known || m.Name == model
	}
	if !known {
		return fmt.Errorf("history: no model is named %q in %s", model, *path)
	}
	if *line != "" {
		i := strings.LastIndexByte(*line, ':')
		var ln int
		if i < 0 {
			return usageErr("history", fmt.Sprintf("--line wants FILE:LINE, got %q", *line))
		}
		if _, err := fmt.Sscan((*line)[i+1:], &ln); err != nil {
			return usageErr("history", fmt.Sprintf("--line wants FILE:LINE, got %q", *line))
		}
		o, err := db.ObservationAt(ctx, model, (*line)[:i], ln)
		if err != nil {
			return fmt.Errorf("history: %s: %w", *line, err)
		}
		ch, err := db.VerdictChanges(ctx, o.ID)
		if err != nil {
			return err
		}
		// The decisions recorded on the reading (set aside, reinstated).
		var notes []string
		if ds, ok := db.(store.Decisions); ok {
			all, err := ds.Decisions(ctx, model)
			if err != nil {
				return err
			}
			for _, d := range all {
				if d.ObsID == o.ID {
					notes = append(notes, d.Note())
				}
			}
		}
		out := map[string]any{"id": o.ID, "file": o.Path, "line": o.Line, "raw": o.Raw, "arrived_at": o.ArrivedAt, "arrival": o.Arrival, "changes": ch, "decisions": notes}
		if o.Label != "" {
			out["label"] = o.Label
		}
		if *asJSON {
			return writeJSON(e.stdout, out)
		}
		where := fmt.Sprintf("%s:%d", o.Path, o.Line)
		if o.Label != "" {
			where += " [" + o.Label + "]"
		}
		fmt.Fprintf(e.stdout, "%s  %q  arrived %s\n", where, o.Raw, o.ArrivedAt.Local().Format(time.DateTime))
		if a := o.Arrival; a != nil {
			fmt.Fprintf(e.stdout, "  at arrival: %s  leverage %.4g  studentized %.4g  Cook's D %.4g  DFFITS %.4g  Bonferroni p %.3g\n",
				a.Verdict, a.Leverage, a.StudentizedExternal, a.CooksDistance, a.DFFITS, a.OutlierPBonferroni)
			for _, f := range a.Flags {
				fmt.Fprintf(e.stdout, "    - %s\n", f.Text())
			}
		} else {
			fmt.Fprintln(e.stdout, "  at arrival: not judged (the model had too few rows)")
		}
		for _, c := range ch {
			from := c.From
			if from == "" {
				from = "not judged"
			}
			fmt.Fprintf(e.stdout, "  %s  fit %d: %s -> %s\n", c.At.Local().Format(time.DateTime), c.FitID, from, c.To)
			for _, f := range c.Flags {
				fmt.Fprintf(e.stdout, "    - %s\n", f.Text())
			}
		}
		for _, n := range notes {
			fmt.Fprintf(e.stdout, "  decision: %s\n", n)
		}
		return nil
	}
	fits, err := db.Fits(ctx, model, 0, 0)
	if err != nil {
		return err
	}
	if *asJSON {
		out := make([]*fitOut, len(fits))
		for i, f := range fits {
			out[i] = fitOutOf(f)
		}
		return writeJSON(e.stdout, map[string]any{"model": model, "fits": out})
	}
	tw := tabwriter.NewWriter(e.stdout, 2, 4, 2, ' ', 0)
	hdr := "FIT\tAT\tN\tSIGMA\tR²\tFRAGILITY"
	if len(fits) > 0 {
		for _, t := range fits[len(fits)-1].Terms {
			hdr += "\t" + t
		}
	}
	fmt.Fprintln(tw, hdr)
	for _, f := range fits {
		frag := "none"
		if f.Fragility >= 0 {
			frag = fmt.Sprint(f.Fragility)
		} else if f.Fragility == -2 {
			frag = "-"
		}
		row := fmt.Sprintf("%d\t%s\t%d\t%.5g\t%.5f\t%s", f.ID, f.At.Local().Format(time.DateTime), f.N, f.Sigma, f.RSquared, frag)
		for i := range f.Estimates {
			row += fmt.Sprintf("\t%.6g ± %.2g", f.Estimates[i], f.StdErrors[i])
		}
		fmt.Fprintln(tw, row)
	}
	return tw.Flush()
}

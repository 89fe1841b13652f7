package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/user"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"plumb/cmd/plumb/internal/config"
	"plumb/store"
)

func init() {
	register(command{name: "decide", summary: "record a decision: set a reading aside or reinstate it, re-baseline, quiet periods", run: runDecide})
}

const decideUsage = `Decide records, in the state database, a decision that qualified staff
took after an alert, with the operating-system user as the one who decided
and a reason, which is required. Each decision is written with its record
in the audit trail in one transaction; the command prints it only after
the commit. It works beside a running daemon.

plumb never deletes or alters a measurement: a reading set aside stays
stored with its values, provenance and history, and is only left out of
fits. Decisions stay with qualified staff under local quality procedures
and codes.

  plumb decide exclude    --model M --row FILE:LINE --reason TEXT [--alert ID]
  plumb decide reinstate  --model M --row FILE:LINE --reason TEXT
  plumb decide rebaseline --model M --from TIME --reason TEXT
  plumb decide quiet      (--model M | --all) --from TIME (--until TIME | --for DURATION) --reason TEXT
  plumb decide end-quiet  ID --reason TEXT
  plumb decide list       --model M

A reading is named by its file (relative to the model's folder) and line,
"runs/a.csv:212", or by its id with --obs. TIME is RFC 3339
("2026-05-04T10:30:00Z"), a local "2026-05-04 10:30", a local date, or
"now". A quiet period may last at most quiet_max (default 24h).`

// decideFlags are the flags of every decide verb; each verb checks those
// it needs.
type decideFlags struct {
	config, model, row, reason, alert, from, until string
	obs                                            int64
	all                                            bool
	dur                                            time.Duration
}

func runDecide(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "decide", "VERB [flags]", decideUsage)
	var f decideFlags
	fs.StringVar(&f.config, "config", "plumb.toml", "the configuration `file`")
	fs.StringVar(&f.model, "model", "", "the `model`")
	fs.StringVar(&f.row, "row", "", "the reading, as `FILE:LINE` (FILE relative to the model's folder)")
	fs.Int64Var(&f.obs, "obs", 0, "the reading, by its `id`")
	fs.StringVar(&f.reason, "reason", "", "why (required)")
	fs.StringVar(&f.alert, "alert", "", "the alert `id` the decision answers")
	fs.StringVar(&f.from, "from", "", "start `TIME` (re-baseline, quiet period)")
	fs.StringVar(&f.until, "until", "", "end `TIME` of a quiet period")
	fs.DurationVar(&f.dur, "for", 0, "length of a quiet period (instead of --until)")
	fs.BoolVar(&f.all, "all", false, "a quiet period for all models")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) == 0 {
		fs.Usage()
		return fmt.Errorf("decide: %w: name a verb (exclude, reinstate, rebaseline, quiet, end-quiet, list)", errUsage)
	}
	verb, rest := pos[0], pos[1:]
	usage := func(format string, a ...any) error {
		return fmt.Errorf("decide %s: %w: %s", verb, errUsage, fmt.Sprintf(format, a...))
	}
	if verb != "end-quiet" && len(rest) > 0 {
		return usage("unexpected argument %q", rest[0])
	}
	if verb != "list" && strings.TrimSpace(f.reason) == "" {
		return usage("--reason is required")
	}
	cfg, s, err := openState(ctx, f.config)
	if err != nil {
		return err
	}
	defer s.Close()
	dec, ok := s.(store.Decisions)
	if !ok {
		return fmt.Errorf("decide: the state database does not record decisions")
	}
	now := time.Now()
	switch verb {
	case "exclude", "reinstate":
		if f.model == "" {
			return usage("--model is required")
		}
		id, err := findReading(ctx, s, f)
		if err != nil {
			return err
		}
		actor, err := osActor()
		if err != nil {
			return err
		}
		d, err := dec.Decide(ctx, store.Decision{Model: f.model, ObsID: id, Action: verb, Actor: actor, Reason: f.reason, Subject: f.alert})
		if err != nil {
			return err
		}
		word := "set aside"
		if verb == "reinstate" {
			word = "reinstated"
		}
		fmt.Fprintf(e.stdout, "reading %d of %s %s by %s on %s: %s (audit record %d)\n", id, f.model, word, d.Actor,
			d.At.Local().Format(time.DateTime), d.Reason, d.AuditSeq)
		fmt.Fprintln(e.stdout, store.Caution)
	case "rebaseline":
		if f.model == "" || f.from == "" {
			return usage("--model and --from are required")
		}
		if !hasModel(cfg, f.model) {
			return fmt.Errorf("decide rebaseline: no model %q in %s", f.model, f.config)
		}
		from, err := parseWhen(f.from, now)
		if err != nil {
			return usage("--from: %v", err)
		}
		actor, err := osActor()
		if err != nil {
			return err
		}
		r, err := dec.Rebaseline(ctx, store.Rebaseline{Model: f.model, From: from, Actor: actor, Reason: f.reason})
		if err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "%s re-baselined from %s by %s: %s (audit record %d)\n", f.model,
			r.From.Local().Format(time.DateTime), r.Actor, r.Reason, r.AuditSeq)
	case "quiet":
		return decideQuiet(ctx, e, cfg, dec, f, now, usage)
	case "end-quiet":
		if len(rest) != 1 {
			return usage("name one quiet period id")
		}
		id, err := strconv.ParseInt(rest[0], 10, 64)
		if err != nil {
			return usage("quiet period id %q is not a number", rest[0])
		}
		actor, err := osActor()
		if err != nil {
			return err
		}
		q, err := dec.EndQuiet(ctx, id, time.Time{}, actor, f.reason)
		if err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "quiet period %d ended at %s by %s: %s (audit record %d)\n", q.ID,
			q.End.Local().Format(time.DateTime), q.EndedBy, q.EndReason, q.AuditSeq)
	case "list":
		if f.model == "" {
			return usage("--model is required")
		}
		return decideList(ctx, e, s, dec, f.model)
	default:
		return usage("unknown verb %q (want exclude, reinstate, rebaseline, quiet, end-quiet or list)", verb)
	}
	return nil
}

func decideQuiet(ctx context.Context, e *env, cfg *config.Config, dec store.Decisions, f decideFlags, now time.Time,
	usage func(string, ...any) error) error {
	if (f.model == "") == !f.all {
		return usage("give --model M or --all")
	}
	if f.model != "" && !hasModel(cfg, f.model) {
		return fmt.Errorf("decide quiet: no model %q in %s", f.model, f.config)
	}
	if f.from == "" || (f.until == "") == (f.dur == 0) {
		return usage("--from and one of --until or --for are required (a quiet period always ends)")
	}
	start, err := parseWhen(f.from, now)
	if err != nil {
		return usage("--from: %v", err)
	}
	end := start.Add(f.dur)
	if f.until != "" {
		if end, err = parseWhen(f.until, now); err != nil {
			return usage("--until: %v", err)
		}
	}
	if !end.After(start) {
		return usage("the end (%s) must come after the start (%s)", end.Format(time.RFC3339), start.Format(time.RFC3339))
	}
	if max := cfg.QuietMax.Duration; end.Sub(start) > max {
		return usage("a quiet period may last at most quiet_max = %v; this one lasts %v", max, end.Sub(start))
	}
	if !end.After(now) {
		return usage("the period ends in the past (%s)", end.Local().Format(time.DateTime))
	}
	actor, err := osActor()
	if err != nil {
		return err
	}
	q, err := dec.SetQuiet(ctx, store.QuietPeriod{Model: f.model, Start: start, End: end, Owner: actor, Reason: f.reason})
	if err != nil {
		return err
	}
	what := "model " + q.Model
	if q.Model == "" {
		what = "all models"
	}
	fmt.Fprintf(e.stdout, "quiet period %d for %s from %s to %s, owner %s: %s (audit record %d)\n", q.ID, what,
		q.Start.Local().Format(time.DateTime), q.End.Local().Format(time.DateTime), q.Owner, q.Reason, q.AuditSeq)
	return nil
}

// findReading returns the id of the reading named by --obs or --row.
func findReading(ctx context.Context, s store.Store, f decideFlags) (int64, error) {
	if (f.obs == 0) == (f.row == "") {
		return 0, fmt.Errorf("decide: %w: name the reading with --row FILE:LINE or --obs ID", errUsage)
	}
	if f.obs != 0 {
		return f.obs, nil
	}
	path, lineText, ok := cutLast(f.row, ":")
	line, err := strconv.Atoi(lineText)
	if !ok || err != nil || line < 1 || path == "" {
		return 0, fmt.Errorf("decide: %w: --row wants FILE:LINE, got %q", errUsage, f.row)
	}
	o, err := s.ObservationAt(ctx, f.model, path, line)
	if errors.Is(err, store.ErrNotFound) {
		return 0, fmt.Errorf("decide: model %s has no reading at %s (files are named relative to the model's folder)", f.model, f.row)
	}
	if err != nil {
		return 0, err
	}
	return o.ID, nil
}

func cutLast(s, sep string) (before, after string, found bool) {
	i := strings.LastIndex(s, sep)
	if i < 0 {
		return s, "", false
	}
	return s[:i], s[i+len(sep):], true
}

func hasModel(cfg *config.Config, name string) bool {
	for _, m := range cfg.Models {
		if m.Name == name {
			return true
		}
	}
	return false
}

// osActor names the operating-system user, as "os:NAME", for decisions
// taken on the database directly.
func osActor() (string, error) {
	u, err := user.Current()
	name := ""
	if err == nil {
		name = u.Username
	}
	if name == "" {
		name = os.Getenv("USER")
	}
	if name == "" {
		return "", errors.New("decide: cannot tell the operating-system user (set USER)")
	}
	return "os:" + name, nil
}

// parseWhen parses a time: RFC 3339, a local "2006-01-02 15:04[:05]" or
// "2006-01-02T15:04[:05]", a local date, or "now".
func parseWhen(s string, now time.Time) (time.Time, error) {
	s = strings.TrimSpace(s)
	if s == "now" {
		return now, nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t, nil
	}
	for _, layout := range []string{"2006-01-02 15:04:05", "2006-01-02 15:04", "2006-01-02T15:04:05", "2006-01-02T15:04", "2006-01-02"} {
		if t, err := time.ParseInLocation(layout, s, time.Local); err == nil {
			return t, nil
		}
	}
	return time.Time{}, fmt.Errorf("%q is not a time (want RFC 3339, \"2006-01-02 15:04\", a date or \"now\")", s)
}

func decideList(ctx context.Context, e *env, s store.Store, dec store.Decisions, model string) error {
	ds, err := dec.Decisions(ctx, model)
	if err != nil {
		return err
	}
	rs, err := dec.Rebaselines(ctx, model)
	if err != nil {
		return err
	}
	qs, err := dec.QuietPeriods(ctx, model, time.Time{})
	if err != nil {
		return err
	}
	tw := tabwriter.NewWriter(e.stdout, 2, 4, 2, ' ', 0)
	ex := store.ExcludedAt(ds, time.Time{})
	fmt.Fprintf(tw, "Decisions on readings of %s (%d set aside now):\n", model, len(ex))
	if len(ds) > 0 {
		fmt.Fprintln(tw, "WHEN\tDECISION\tREADING\tBY\tREASON\tALERT")
	}
	for _, d := range ds {
		ref := strconv.FormatInt(d.ObsID, 10)
		if o, err := observationByID(ctx, s, model, d.ObsID); err == nil {
			ref = store.RowRef(o.Path, o.Generation, o.Line)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\n", d.At.Local().Format(time.DateTime), d.Action, ref, d.Actor, d.Reason, d.Subject)
	}
	fmt.Fprintf(tw, "\nRe-baselines:\n")
	if len(rs) > 0 {
		fmt.Fprintln(tw, "FROM\tBY\tREASON\tRECORDED")
	}
	for _, r := range rs {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\n", r.From.Local().Format(time.DateTime), r.Actor, r.Reason, r.Recorded.Local().Format(time.DateTime))
	}
	fmt.Fprintf(tw, "\nQuiet periods:\n")
	if len(qs) > 0 {
		fmt.Fprintln(tw, "ID\tMODEL\tSTART\tEND\tOWNER\tREASON\tENDED EARLY BY")
	}
	for _, q := range qs {
		m := q.Model
		if m == "" {
			m = "(all)"
		}
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t%s\t%s\n", q.ID, m, q.Start.Local().Format(time.DateTime), q.End.Local().Format(time.DateTime),
			q.Owner, q.Reason, q.EndedBy)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintln(e.stdout, "\n"+store.Caution)
	return nil
}

// observationByID finds one observation of the model by id, paging from
// just before it.
func observationByID(ctx context.Context, s store.Store, model string, id int64) (store.Observation, error) {
	obs, err := s.Observations(ctx, model, store.ObsQuery{AfterID: id - 1, Limit: 1})
	if err != nil {
		return store.Observation{}, err
	}
	if len(obs) == 0 || obs[0].ID != id {
		return store.Observation{}, store.ErrNotFound
	}
	return obs[0], nil
}

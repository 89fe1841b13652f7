package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/url"
	"os"
	"strings"
	"syscall"
	"text/tabwriter"
	"time"

	"plumb/alerts"
	"plumb/cmd/plumb/internal/daemon"
	"plumb/store"
)

func init() {
	register(command{name: "alerts", summary: "list alerts (open, acknowledged, resolved)", run: runAlerts})
	register(command{name: "ack", summary: "acknowledge an alert: it stays open but is not sent again", run: runAck})
	register(command{name: "resolve", summary: "resolve an alert by hand", run: runResolve})
}

func runAlerts(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "alerts", "--config FILE [--state open|acknowledged|resolved|all] [--json]",
		"Alerts lists the alert ledger, newest first.")
	path := fs.String("config", "plumb.toml", "the configuration `file`")
	state := fs.String("state", "open", "which alerts: open, acknowledged, resolved or all")
	model := fs.String("model", "", "only this `model`")
	asJSON := fs.Bool("json", false, "print JSON (each alert's full document)")
	if _, err := parseFlags(fs, args); err != nil {
		return err
	}
	switch *state {
	case "open", "acknowledged", "resolved":
	case "all":
		*state = ""
	default:
		return usageErr("alerts", fmt.Sprintf("--state wants open, acknowledged, resolved or all, got %q", *state))
	}
	_, db, err := openState(ctx, *path)
	if err != nil {
		return err
	}
	defer db.Close()
	as, err := db.Alerts(ctx, store.AlertQuery{State: *state, Model: *model})
	if err != nil {
		return err
	}
	if *asJSON {
		docs := make([]json.RawMessage, len(as))
		for i, a := range as {
			docs[i] = json.RawMessage(a.Doc)
		}
		return writeJSON(e.stdout, map[string]any{"alerts": docs})
	}
	if len(as) == 0 {
		fmt.Fprintln(e.stdout, "no alerts")
		return nil
	}
	tw := tabwriter.NewWriter(e.stdout, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tSTATE\tSEVERITY\tKIND\tSUBJECT\tLAST SEEN\tSUMMARY")
	for _, a := range as {
		summary := ""
		if d, err := alerts.DecodeAlert([]byte(a.Doc)); err == nil {
			summary = d.Summary
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\n", a.ID, a.State, a.Severity, a.Kind, a.Subject, a.LastSeen.Local().Format(time.DateTime), summary)
	}
	return tw.Flush()
}

func runAck(ctx context.Context, e *env, args []string) error {
	return alertAction(ctx, e, args, "ack", "acknowledged")
}

func runResolve(ctx context.Context, e *env, args []string) error {
	return alertAction(ctx, e, args, "resolve", "resolved")
}

// alertAction acknowledges or resolves an alert. While the daemon runs it
// owns the alert ledger, so the action goes through its HTTP API; with no
// daemon listening, the command acts on the state database itself.
func alertAction(ctx context.Context, e *env, args []string, verb, done string) error {
	syn := "--config FILE ID [--note TEXT]"
	fs := newFlags(e, verb, syn, fmt.Sprintf("%s marks the alert %s and records who and why.", strings.ToUpper(verb[:1])+verb[1:], done))
	path := fs.String("config", "plumb.toml", "the configuration `file`")
	note := fs.String("note", "", "a note kept with the alert")
	who := fs.String("by", os.Getenv("USER"), "who acts (kept with the alert)")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return usageErr(verb, "name one alert id (the ID column of plumb alerts)")
	}
	id := pos[0]
	cfg, err := loadConfig(*path)
	if err != nil {
		return &exitError{code: 1, err: err}
	}
	if cfg.Listen != "" {
		token := ""
		if cfg.TokenEnv != "" {
			token = e.getenv(cfg.TokenEnv)
		}
		err := postAction(ctx, cfg.Listen, id, verb, *note, *who, token)
		if err == nil {
			fmt.Fprintf(e.stdout, "%s %s (through the running daemon)\n", id, done)
			return nil
		}
		if !errors.Is(err, errNoDaemon) {
			return err
		}
	}
	p := cfg.Resolve(cfg.State)
	if err := stateReady(p); err != nil {
		return err
	}
	m, db, err := daemon.OpenLedger(ctx, p, alerts.Config{Rules: alerts.DefaultRules()})
	if err != nil {
		return err
	}
	defer db.Close()
	if verb == "ack" {
		_, err = m.Ack(ctx, id, *note, *who)
	} else {
		_, err = m.ResolveBy(ctx, id, *note, *who)
	}
	if err != nil {
		return actionError(id, err)
	}
	fmt.Fprintf(e.stdout, "%s %s\n", id, done)
	return nil
}

var errNoDaemon = errors.New("no daemon listening")

func postAction(ctx context.Context, addr, id, verb, note, who, token string) error {
	body, _ := json.Marshal(map[string]string{"note": note, "by": who})
	u := "http://" + addr + "/api/v1/alerts/" + url.PathEscape(id) + "/" + verb
	ctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, u, bytes.NewReader(body))
	if err != nil {
		return err
	}
	req.Header.Set("Content-Type", "application/json")
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		var op *net.OpError
		if errors.Is(err, syscall.ECONNREFUSED) || errors.As(err, &op) {
			return errNoDaemon
		}
		return err
	}
	defer resp.Body.Close()
	msg, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
	if resp.StatusCode/100 == 2 {
		return nil
	}
	var answer struct {
		Error string `json:"error"`
	}
	text := strings.TrimSpace(string(msg))
	if json.Unmarshal(msg, &answer) == nil && answer.Error != "" {
		text = answer.Error
	}
	switch resp.StatusCode {
	case http.StatusNotFound:
		return actionError(id, store.ErrNotFound)
	case http.StatusConflict:
		return actionError(id, alerts.ErrNotOpen)
	case http.StatusUnauthorized, http.StatusForbidden:
		return fmt.Errorf("the daemon refused to change alert %s: %s", id, text)
	}
	return fmt.Errorf("the daemon could not change alert %s (%s): %s", id, resp.Status, text)
}

// actionError says in one line why an alert could not be acknowledged or
// resolved.
func actionError(id string, err error) error {
	switch {
	case errors.Is(err, store.ErrNotFound):
		return fmt.Errorf("no alert has the id %q; plumb alerts --state all lists them", id)
	case errors.Is(err, alerts.ErrNotOpen):
		return fmt.Errorf("alert %s is already resolved; nothing was changed", id)
	}
	return err
}

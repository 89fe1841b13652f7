//go:build unix

package alerts

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

func writeScript(tb testing.TB, body string) string {
	tb.Helper()
	p := filepath.Join(tb.TempDir(), "notify.sh")
	if err := os.WriteFile(p, []byte("#!/bin/sh\n"+body), 0o755); err != nil {
		tb.Fatal(err)
	}
	return p
}

func commandHarness(t *testing.T, argv []string, timeout time.Duration) (*harness, *Dispatcher, *Route) {
	t.Helper()
	rc := RouteConfig{Name: "notify", Kind: RouteCommand, Argv: argv, Timeout: timeout, MaxAttempts: 2}
	h := newHarness(t, func(c *Config) { c.Routes = []RouteConfig{rc} })
	route, err := NewRoute(rc, RouteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	d := NewDispatcher(h.l, []*Route{route})
	d.Now = h.clock.Now
	d.Logger = discardLogger()
	return h, d, route
}

func TestCommandReceivesEventOnStdin(t *testing.T) {
	out := filepath.Join(t.TempDir(), "got")
	script := writeScript(t, `cat > "$1"; printf '%s %s' "$PLUMB_EVENT_ID" "$PLUMB_ALERT_ID" > "$1.env"`)
	// The route runs argv directly; the shell here is the test's program.
	h, d, _ := commandHarness(t, []string{"/bin/sh", script, out}, 10*time.Second)
	ctx := context.Background()
	a := mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if n, err := d.Flush(ctx); err != nil || n != 1 {
		t.Fatalf("flush: %d %v", n, err)
	}
	got, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if want := h.l.all()[0].Payload; string(got) != string(want) {
		t.Errorf("stdin:\n%s\nwant\n%s", got, want)
	}
	env, _ := os.ReadFile(out + ".env")
	if string(env) != a.ID+"-1 "+a.ID {
		t.Errorf("environment %q", env)
	}
}

func TestCommandKilledAtTimeout(t *testing.T) {
	pidFile := filepath.Join(t.TempDir(), "child.pid")
	// The script starts a child that would outlive it, then waits.
	script := writeScript(t, `sleep 60 & echo $! > "$1"; wait`)
	_, _, route := commandHarness(t, []string{"/bin/sh", script, pidFile}, 300*time.Millisecond)
	start := time.Now()
	err := route.Send(context.Background(), Delivery{EventID: "x-1", Payload: []byte("{}")})
	elapsed := time.Since(start)
	if err == nil || !strings.Contains(err.Error(), "killed") || !errors.Is(err, context.DeadlineExceeded) {
		t.Fatalf("err %v, want killed at the deadline", err)
	}
	if elapsed > 10*time.Second {
		t.Errorf("Send returned after %v", elapsed)
	}
	b, err := os.ReadFile(pidFile)
	if err != nil {
		t.Fatal(err)
	}
	pid, _ := strconv.Atoi(strings.TrimSpace(string(b)))
	if pid <= 0 {
		t.Fatalf("pid file %q", b)
	}
	// The whole process group is gone (or a zombie waiting for its reaper).
	deadline := time.Now().Add(5 * time.Second)
	for {
		if !alive(pid) {
			break
		}
		if time.Now().After(deadline) {
			syscall.Kill(pid, syscall.SIGKILL)
			t.Fatalf("child %d of the hanging program survived the timeout", pid)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

func alive(pid int) bool {
	if err := syscall.Kill(pid, 0); errors.Is(err, syscall.ESRCH) {
		return false
	}
	stat, err := os.ReadFile("/proc/" + strconv.Itoa(pid) + "/stat")
	if err != nil {
		return false
	}
	// The state follows the parenthesised command name.
	s := string(stat)
	if i := strings.LastIndexByte(s, ')'); i >= 0 && i+2 < len(s) {
		return s[i+2] != 'Z'
	}
	return true
}

func TestCommandMissingProgram(t *testing.T) {
	h, d, _ := commandHarness(t, []string{"/nonexistent/plumb-notify", "--page"}, time.Second)
	ctx := context.Background()
	mustAlert(t)(h.m.Point(ctx, suspectRow(212)))
	if _, err := d.Flush(ctx); err != nil {
		t.Fatal(err)
	}
	dead, _ := h.l.Deliveries(ctx, DeliveryDead, 10)
	if len(dead) != 1 {
		t.Fatalf("dead letters %+v, want 1", dead)
	}
	e := dead[0].LastError
	for _, want := range []string{`route "notify"`, `program "/nonexistent/plumb-notify" cannot be run`, "no such file"} {
		if !strings.Contains(e, want) {
			t.Errorf("recorded error %q lacks %q", e, want)
		}
	}
	if dead[0].Attempts != 1 {
		t.Errorf("%d attempts for a missing program, want 1", dead[0].Attempts)
	}
}

func TestCommandFailureCarriesOutput(t *testing.T) {
	script := writeScript(t, `cat > /dev/null; echo "pager gateway refused" >&2; exit 3`)
	_, _, route := commandHarness(t, []string{"/bin/sh", script}, 10*time.Second)
	err := route.Send(context.Background(), Delivery{EventID: "x-1", Payload: []byte("{}")})
	var perm *PermanentError
	if err == nil || !strings.Contains(err.Error(), "exit status 3") ||
		!strings.Contains(err.Error(), "pager gateway refused") || errors.As(err, &perm) {
		t.Errorf("err %v, want a retryable error with the exit status and stderr", err)
	}
}

func TestCommandDoesNotInheritSecrets(t *testing.T) {
	t.Setenv("PLUMB_HOOK_SECRET", "do-not-pass-on")
	t.Setenv("PLUMB_TEST_VISIBLE", "fine")
	out := filepath.Join(t.TempDir(), "env")
	script := writeScript(t, `cat > /dev/null; env > "$1"`)
	routes, err := NewRoutes([]RouteConfig{
		{Name: "oncall", Kind: RouteWebhook, URL: "http://127.0.0.1:9911/hook", SecretEnv: "PLUMB_HOOK_SECRET"},
		{Name: "notify", Kind: RouteCommand, Argv: []string{"/bin/sh", script, out}},
	}, RouteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if err := routes[1].Send(context.Background(), Delivery{EventID: "x-1", AlertID: "x", Payload: []byte("{}")}); err != nil {
		t.Fatal(err)
	}
	env, _ := os.ReadFile(out)
	if strings.Contains(string(env), "do-not-pass-on") || strings.Contains(string(env), "PLUMB_HOOK_SECRET") {
		t.Error("the command inherited the webhook secret")
	}
	if !strings.Contains(string(env), "PLUMB_TEST_VISIBLE=fine") || !strings.Contains(string(env), "PLUMB_EVENT_ID=x-1") {
		t.Errorf("environment lacks ordinary variables:\n%s", env)
	}
}

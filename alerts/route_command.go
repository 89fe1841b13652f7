package alerts

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"os/exec"
	"slices"
	"strings"
	"time"
)

// commandSender runs a program with the event JSON on stdin. The program
// runs in its own process group; at the route's timeout the whole group is
// killed. The environment adds PLUMB_EVENT_ID, PLUMB_ALERT_ID and
// PLUMB_ROUTE. Exit status 0 is success.
type commandSender struct {
	name string
	argv []string
	hide []string // environment variables the program must not see
}

// tailBuffer keeps the last n bytes written to it.
type tailBuffer struct {
	n int
	b []byte
}

func (t *tailBuffer) Write(p []byte) (int, error) {
	t.b = append(t.b, p...)
	if len(t.b) > t.n {
		t.b = t.b[len(t.b)-t.n:]
	}
	return len(p), nil
}

func (s *commandSender) Send(ctx context.Context, d Delivery) error {
	prog := s.argv[0]
	path, err := exec.LookPath(prog)
	if err != nil {
		return Permanent(fmt.Errorf("program %q cannot be run: %w", prog, err))
	}
	cmd := exec.CommandContext(ctx, path, s.argv[1:]...)
	cmd.Stdin = bytes.NewReader(d.Payload)
	var env []string
	for _, kv := range os.Environ() {
		k, _, _ := strings.Cut(kv, "=")
		if !slices.Contains(s.hide, k) {
			env = append(env, kv)
		}
	}
	cmd.Env = append(env, "PLUMB_EVENT_ID="+d.EventID, "PLUMB_ALERT_ID="+d.AlertID, "PLUMB_ROUTE="+s.name)
	out := &tailBuffer{n: 512}
	cmd.Stdout, cmd.Stderr = out, out
	setProcessGroup(cmd)
	cmd.WaitDelay = 2 * time.Second
	err = cmd.Run()
	if err == nil {
		return nil
	}
	msg := strings.TrimSpace(string(out.b))
	if msg != "" {
		msg = ": " + msg
	}
	switch {
	case errors.Is(err, fs.ErrNotExist), errors.Is(err, fs.ErrPermission), errors.Is(err, exec.ErrNotFound):
		return Permanent(fmt.Errorf("program %q cannot be run: %w", prog, err))
	case ctx.Err() != nil:
		return fmt.Errorf("program %q killed: %w (%v)%s", prog, ctx.Err(), err, msg)
	}
	return fmt.Errorf("program %q failed: %w%s", prog, err, msg)
}

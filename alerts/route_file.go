package alerts

import (
	"context"
	"fmt"
	"os"
	"sync"
)

// fileSender appends each event as one JSON line. The file is opened with
// O_APPEND for every event (so an outside rotation is followed), written in
// one Write and synced before the delivery counts as done.
type fileSender struct {
	path string
	mu   sync.Mutex
}

func (s *fileSender) Send(ctx context.Context, d Delivery) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	line := make([]byte, 0, len(d.Payload)+1)
	line = append(append(line, d.Payload...), '\n')
	s.mu.Lock()
	defer s.mu.Unlock()
	f, err := os.OpenFile(s.path, os.O_WRONLY|os.O_APPEND|os.O_CREATE, 0o640)
	if err != nil {
		return err
	}
	if _, err := f.Write(line); err != nil {
		f.Close()
		return fmt.Errorf("append to %s: %w", s.path, err)
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return fmt.Errorf("sync %s: %w", s.path, err)
	}
	return f.Close()
}

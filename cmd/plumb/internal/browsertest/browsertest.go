// Package browsertest holds what the real-browser tests of the web server
// and the report share: where Debian's chromium is, a fresh profile folder
// per test, and where screenshots go.
package browsertest

import (
	"os"
	"testing"
	"time"
)

// ChromiumPath is Debian's chromium; the tests skip when it is absent.
const ChromiumPath = "/usr/bin/chromium"

// ProfileDir returns a fresh chromium profile folder. It is removed with
// retries: chromium's helper processes can still write there for a moment
// after the browser stops, which would fail t.TempDir's cleanup.
func ProfileDir(t testing.TB) string {
	t.Helper()
	dir, err := os.MkdirTemp("", "plumb-chromium-")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		for range 50 {
			if os.RemoveAll(dir) == nil {
				return
			}
			time.Sleep(100 * time.Millisecond)
		}
	})
	return dir
}

// ArtifactDir is where screenshots go: $PLUMB_ARTIFACTS, or a temporary
// folder of the test.
func ArtifactDir(t testing.TB) string {
	t.Helper()
	if d := os.Getenv("PLUMB_ARTIFACTS"); d != "" {
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
		return d
	}
	return t.TempDir()
}

// Package browsertest holds what the real-browser tests of the web server
// and the report share: where Debian's chromium is, a fresh profile folder
// per test, and where screenshots go.
package browsertest

import (
	"context"
	"fmt"
	"os"
	"strings"
	"sync"
	"testing"
	"time"

	cdplog "github.com/chromedp/cdproto/log"
	"github.com/chromedp/cdproto/runtime"
	"github.com/chromedp/chromedp"
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

// Start launches headless Debian chromium with the flags this machine
// needs (no background networking, no sandbox as root, a fresh profile)
// and a window of the given size, and collects what the page reports:
// console errors, uncaught exceptions and error log entries, and with
// warnings also console warnings and warning log entries. It skips the
// test under -short or when chromium is absent. The browser stops when
// the test ends; problems returns what was collected so far.
func Start(t *testing.T, width, height int, warnings bool) (ctx context.Context, problems func() []string) {
	t.Helper()
	if testing.Short() {
		t.Skip("browser test skipped under -short")
	}
	if _, err := os.Stat(ChromiumPath); err != nil {
		t.Skipf("browser test skipped: %s not found (apt-get install -y chromium)", ChromiumPath)
	}
	opts := append(chromedp.DefaultExecAllocatorOptions[:],
		chromedp.ExecPath(ChromiumPath),
		chromedp.Flag("headless", true),
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.Flag("disable-quic", true),
		chromedp.NoFirstRun,
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.UserDataDir(ProfileDir(t)),
		chromedp.WindowSize(width, height),
	)
	actx, cancelA := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancelB := chromedp.NewContext(actx)
	ctx, cancelT := context.WithTimeout(ctx, 90*time.Second)
	t.Cleanup(func() { cancelT(); cancelB(); cancelA() })

	var mu sync.Mutex
	var seen []string
	err := chromedp.Listen(ctx, func(ev any) {
		mu.Lock()
		defer mu.Unlock()
		switch ev := ev.(type) {
		case *runtime.EventConsoleAPICalled:
			if ev.Type == runtime.ConsoleAPICalledTypeError || (warnings && ev.Type == runtime.ConsoleAPICalledTypeWarning) {
				var parts []string
				for _, a := range ev.Args {
					parts = append(parts, string(a.Value)+a.Description)
				}
				seen = append(seen, fmt.Sprintf("console.%s: %s", ev.Type, strings.Join(parts, " ")))
			}
		case *runtime.EventExceptionThrown:
			seen = append(seen, (&chromedp.ExceptionError{ExceptionDetails: ev.ExceptionDetails}).Error())
		case *cdplog.EventEntryAdded:
			if ev.Entry.Level == cdplog.EntryLevelError || (warnings && ev.Entry.Level == cdplog.EntryLevelWarning) {
				seen = append(seen, fmt.Sprintf("log %s: %s %s", ev.Entry.Level, ev.Entry.Text, ev.Entry.URL))
			}
		}
	})
	if err != nil {
		t.Fatalf("start chromium: %v", err)
	}
	return ctx, func() []string {
		mu.Lock()
		defer mu.Unlock()
		return append([]string(nil), seen...)
	}
}

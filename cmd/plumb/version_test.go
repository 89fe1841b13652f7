package main

import (
	"bytes"
	"context"
	"encoding/json"
	"runtime/debug"
	"strings"
	"testing"
)

// runCapture runs args through runMain with buffers for the outside world.
func runCapture(t testing.TB, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var out, errb bytes.Buffer
	e := &env{stdin: strings.NewReader(""), stdout: &out, stderr: &errb, getenv: func(string) string { return "" }}
	code = runMain(context.Background(), e, args)
	return code, out.String(), errb.String()
}

// withBuildInfo replaces the build information for one test.
func withBuildInfo(t *testing.T, bi *debug.BuildInfo, ok bool) {
	t.Helper()
	old := readBuildInfo
	readBuildInfo = func() (*debug.BuildInfo, bool) { return bi, ok }
	t.Cleanup(func() { readBuildInfo = old })
}

func stamped(version string, settings ...string) *debug.BuildInfo {
	bi := &debug.BuildInfo{GoVersion: "go1.26.8", Path: "plumb/cmd/plumb", Main: debug.Module{Path: "plumb", Version: version}}
	for i := 0; i+1 < len(settings); i += 2 {
		bi.Settings = append(bi.Settings, debug.BuildSetting{Key: settings[i], Value: settings[i+1]})
	}
	return bi
}

func TestVersionLine(t *testing.T) {
	const rev = "abc1234def567890abc1234def567890abc12345"
	tests := []struct {
		name string
		bi   *debug.BuildInfo
		ok   bool
		want string
	}{
		{
			name: "modified checkout",
			bi: stamped("v0.0.0-20261201220000-abc1234def56+dirty",
				"vcs", "git", "vcs.revision", rev, "vcs.time", "2026-12-01T22:00:00Z", "vcs.modified", "true"),
			ok:   true,
			want: "plumb v0.0.0-20261201220000-abc1234def56+dirty (revision abc1234def56, 2026-12-01T22:00:00Z, modified) go1.26.8\n",
		},
		{
			name: "clean tag",
			bi: stamped("v1.2.0",
				"vcs", "git", "vcs.revision", rev, "vcs.time", "2026-12-01T22:00:00Z", "vcs.modified", "false"),
			ok:   true,
			want: "plumb v1.2.0 (revision abc1234def56, 2026-12-01T22:00:00Z) go1.26.8\n",
		},
		{
			name: "no vcs stamping",
			bi:   stamped("(devel)"),
			ok:   true,
			want: "plumb (devel) (no revision recorded) go1.26.8\n",
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			withBuildInfo(t, tt.bi, tt.ok)
			code, out, errOut := runCapture(t, "version")
			if code != 0 || errOut != "" {
				t.Fatalf("exit %d, stderr %q", code, errOut)
			}
			if out != tt.want {
				t.Errorf("got  %q\nwant %q", out, tt.want)
			}
		})
	}
}

func TestVersionNoBuildInfo(t *testing.T) {
	withBuildInfo(t, nil, false)
	code, out, _ := runCapture(t, "version")
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	if !strings.HasPrefix(out, "plumb (unknown) (no revision recorded) go") {
		t.Errorf("got %q", out)
	}
}

func TestVersionJSON(t *testing.T) {
	withBuildInfo(t, stamped("v0.3.1", "vcs", "git", "vcs.revision", "0123456789abcdef", "vcs.time", "2026-11-30T08:15:00Z", "vcs.modified", "true"), true)
	code, out, errOut := runCapture(t, "version", "--json")
	if code != 0 {
		t.Fatalf("exit %d, stderr %q", code, errOut)
	}
	var got buildInfo
	if err := json.Unmarshal([]byte(out), &got); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, out)
	}
	want := buildInfo{Module: "plumb", Version: "v0.3.1", Revision: "0123456789abcdef", Time: "2026-11-30T08:15:00Z",
		Modified: true, VCS: "git", GoVersion: "go1.26.8"}
	if got != want {
		t.Errorf("got  %+v\nwant %+v", got, want)
	}
}

// TestVersionReal runs the command on the test binary's own build
// information, which the toolchain always provides.
func TestVersionReal(t *testing.T) {
	bi, ok := debug.ReadBuildInfo()
	if !ok {
		t.Skip("test binary carries no build information")
	}
	code, out, errOut := runCapture(t, "version")
	if code != 0 || errOut != "" {
		t.Fatalf("exit %d, stderr %q", code, errOut)
	}
	if !strings.HasSuffix(out, " "+bi.GoVersion+"\n") {
		t.Errorf("output %q does not end with the toolchain version %s", out, bi.GoVersion)
	}
}

func TestVersionUsage(t *testing.T) {
	code, _, errOut := runCapture(t, "version", "extra")
	if code != 2 {
		t.Errorf("exit %d, want 2 for an unexpected argument", code)
	}
	if !strings.Contains(errOut, "no arguments expected") {
		t.Errorf("stderr %q does not explain the usage error", errOut)
	}
	if code, _, _ := runCapture(t, "version", "--help"); code != 0 {
		t.Errorf("--help exit %d, want 0", code)
	}
}

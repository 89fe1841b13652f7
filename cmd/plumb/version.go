package main

import (
	"context"
	"encoding/json"
	"fmt"
	"runtime"
	"runtime/debug"
	"strings"
)

func init() {
	register(command{
		name:    "version",
		summary: "print the module version and the revision it was built from",
		run:     runVersion,
	})
}

// buildInfo is what "plumb version" reports, also its --json form.
type buildInfo struct {
	// Module is the main module's path ("plumb").
	Module string `json:"module"`
	// Version is the main module's version as the go command recorded it:
	// a tag, a pseudo-version, or "(devel)" for a build without one.
	Version string `json:"version"`
	// Revision, Time and Modified come from the vcs.* build settings; they
	// are empty (false) when the binary was built without VCS stamping
	// (-buildvcs=false, or outside a checkout).
	Revision string `json:"revision,omitempty"`
	Time     string `json:"time,omitempty"`
	Modified bool   `json:"modified"`
	VCS      string `json:"vcs,omitempty"`
	// GoVersion is the toolchain that built the binary.
	GoVersion string `json:"go_version"`
}

// readBuildInfo is debug.ReadBuildInfo; tests replace it.
var readBuildInfo = debug.ReadBuildInfo

// collectBuildInfo extracts the reported fields from the runtime's build
// information. ok is false when the binary carries none.
func collectBuildInfo(bi *debug.BuildInfo, ok bool) buildInfo {
	out := buildInfo{Module: "plumb", Version: "(unknown)", GoVersion: runtime.Version()}
	if !ok || bi == nil {
		return out
	}
	if bi.GoVersion != "" {
		out.GoVersion = bi.GoVersion
	}
	if bi.Main.Path != "" {
		out.Module = bi.Main.Path
	}
	if bi.Main.Version != "" {
		out.Version = bi.Main.Version
	}
	for _, s := range bi.Settings {
		switch s.Key {
		case "vcs":
			out.VCS = s.Value
		case "vcs.revision":
			out.Revision = s.Value
		case "vcs.time":
			out.Time = s.Value
		case "vcs.modified":
			out.Modified = s.Value == "true"
		}
	}
	return out
}

// String is the one-line form, e.g.
//
//	plumb v0.0.0-20261201220000-abc1234def56 (revision abc1234, 2026-12-01T22:00:00Z, modified) go1.26.8
func (b buildInfo) String() string {
	var s strings.Builder
	fmt.Fprintf(&s, "%s %s", b.Module, b.Version)
	if b.Revision == "" {
		s.WriteString(" (no revision recorded)")
	} else {
		rev := b.Revision
		if len(rev) > 12 {
			rev = rev[:12]
		}
		parts := []string{"revision " + rev}
		if b.Time != "" {
			parts = append(parts, b.Time)
		}
		if b.Modified {
			parts = append(parts, "modified")
		}
		fmt.Fprintf(&s, " (%s)", strings.Join(parts, ", "))
	}
	fmt.Fprintf(&s, " %s", b.GoVersion)
	return s.String()
}

func runVersion(ctx context.Context, e *env, args []string) error {
	fs := newFlags(e, "version", "[--json]",
		"Version prints the module version of this binary and the version-control revision,\n"+
			"commit time and modified state it was built from, as the Go toolchain recorded them.")
	asJSON := fs.Bool("json", false, "print a JSON object instead of one line")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return usageErr("version", fmt.Sprintf("no arguments expected, got %q", pos))
	}
	b := collectBuildInfo(readBuildInfo())
	if *asJSON {
		enc := json.NewEncoder(e.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(b)
	}
	_, err = fmt.Fprintln(e.stdout, b.String())
	return err
}

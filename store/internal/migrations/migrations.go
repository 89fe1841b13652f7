// Package migrations reads the embedded schema steps both store backends
// apply: files named NNNN_name.sql, in version order.
package migrations

import (
	"fmt"
	"io/fs"
	"path"
	"strconv"
	"strings"
)

// Migration is one embedded schema step.
type Migration struct {
	Version int
	Name    string
	SQL     string
}

// Load returns the migrations in dir of fsys in version order. A file not
// named NNNN_name.sql, a version of 0, or two files of one version is an
// error.
func Load(fsys fs.FS, dir string) ([]Migration, error) {
	entries, err := fs.ReadDir(fsys, dir)
	if err != nil {
		return nil, err
	}
	var ms []Migration
	for _, e := range entries {
		name := e.Name()
		num, _, ok := strings.Cut(name, "_")
		v, err := strconv.Atoi(num)
		if !ok || err != nil || v <= 0 {
			return nil, fmt.Errorf("migration %s: name must be NNNN_name.sql", name)
		}
		b, err := fs.ReadFile(fsys, path.Join(dir, name))
		if err != nil {
			return nil, err
		}
		if len(ms) > 0 && ms[len(ms)-1].Version >= v {
			return nil, fmt.Errorf("migration %s: version %d out of order", name, v)
		}
		ms = append(ms, Migration{Version: v, Name: name, SQL: string(b)})
	}
	return ms, nil
}

// Latest is the highest version in ms, 0 for none.
func Latest(ms []Migration) int {
	if len(ms) == 0 {
		return 0
	}
	return ms[len(ms)-1].Version
}

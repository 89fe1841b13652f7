package config

import (
	"bytes"
	"slices"
	"strings"
)

// locator finds the line a key stands on in a TOML source. It understands
// the subset of TOML that configuration files use: [table] and [[array]]
// headers, key = value lines and dotted keys. Keys inside inline tables
// are located at the line of the inline table's own key.
type locator struct {
	entries []locEntry
}

type locEntry struct {
	path []string // full key path, without array indices
	// block is the index of the enclosing [[array]] table (0-based) for the
	// first path element, or -1 at the top level.
	block int
	line  int
}

func newLocator(src []byte) *locator {
	l := &locator{}
	var table []string
	block := -1
	counts := map[string]int{}
	for i, raw := range bytes.Split(src, []byte("\n")) {
		line := strings.TrimSpace(stripComment(string(raw)))
		if line == "" {
			continue
		}
		n := i + 1
		switch {
		case strings.HasPrefix(line, "[["):
			name := strings.TrimSpace(strings.TrimSuffix(strings.TrimPrefix(line, "[["), "]]"))
			table = splitKey(name)
			if len(table) == 1 {
				block = counts[table[0]]
				counts[table[0]]++
			} else if len(table) > 1 && counts[table[0]] > 0 {
				block = counts[table[0]] - 1
			}
			l.entries = append(l.entries, locEntry{path: table, block: block, line: n})
		case strings.HasPrefix(line, "["):
			name := strings.TrimSpace(strings.TrimSuffix(strings.TrimPrefix(line, "["), "]"))
			table = splitKey(name)
			if len(table) > 0 && counts[table[0]] == 0 {
				block = -1
			}
			l.entries = append(l.entries, locEntry{path: table, block: block, line: n})
		default:
			eq := strings.IndexByte(line, '=')
			if eq < 0 {
				continue
			}
			key := splitKey(strings.TrimSpace(line[:eq]))
			full := append(append([]string{}, table...), key...)
			l.entries = append(l.entries, locEntry{path: full, block: block, line: n})
		}
	}
	return l
}

// find returns the first line of path, or of its longest located prefix;
// 0 when nothing matches.
func (l *locator) find(path []string) int {
	for k := len(path); k > 0; k-- {
		for _, e := range l.entries {
			if slices.Equal(e.path, path[:k]) {
				return e.line
			}
		}
	}
	return 0
}

// findIndexed is find restricted to the idx-th [[path[0]]] table (idx -1:
// no restriction). A key that the file leaves out is located at its
// table's header line.
func (l *locator) findIndexed(path []string, idx int) int {
	if idx < 0 {
		return l.find(path)
	}
	for k := len(path); k > 0; k-- {
		for _, e := range l.entries {
			if e.block == idx && len(e.path) > 0 && e.path[0] == path[0] && slices.Equal(e.path, path[:k]) {
				return e.line
			}
		}
	}
	return 0
}

// splitKey splits a dotted TOML key, honouring quoted parts.
func splitKey(s string) []string {
	var out []string
	var cur strings.Builder
	quote := byte(0)
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case quote != 0:
			if c == quote {
				quote = 0
			} else {
				cur.WriteByte(c)
			}
		case c == '"' || c == '\'':
			quote = c
		case c == '.':
			out = append(out, strings.TrimSpace(cur.String()))
			cur.Reset()
		default:
			cur.WriteByte(c)
		}
	}
	return append(out, strings.TrimSpace(cur.String()))
}

// stripComment removes a trailing # comment outside quoted strings.
func stripComment(s string) string {
	quote := byte(0)
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case quote != 0:
			if c == '\\' && quote == '"' {
				i++
			} else if c == quote {
				quote = 0
			}
		case c == '"' || c == '\'':
			quote = c
		case c == '#':
			return s[:i]
		}
	}
	return s
}

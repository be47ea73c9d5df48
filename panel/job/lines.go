package job

import (
	"fmt"
	"strings"

	"github.com/pelletier/go-toml/v2/unstable"
)

// tomlFile is one parsed TOML file with the line of every key path in it.
type tomlFile struct {
	name  string
	dir   string
	lines map[string]int
}

// source is where a table came from: its file and key path prefix.
type source struct {
	f   *tomlFile
	key string // e.g. "section[2]"
}

func (s source) err(key string, err error) error {
	full := s.key
	if key != "" {
		if full != "" && !strings.HasPrefix(key, "[") {
			full += "."
		}
		full += key
	}
	return &ParseError{File: s.f.name, Line: s.f.line(full), Key: full, Err: err}
}

func (s source) errf(key, format string, args ...any) error {
	return s.err(key, fmt.Errorf(format, args...))
}

// line returns the line of key path, or of its nearest ancestor that has one.
func (f *tomlFile) line(key string) int {
	for key != "" {
		if l, ok := f.lines[key]; ok {
			return l
		}
		i := strings.LastIndexAny(key, ".[")
		if i < 0 {
			break
		}
		key = key[:i]
	}
	return 0
}

// indexLines walks the TOML syntax tree and records the line on which each
// key path starts: "panel.size", "section[1].traces[0].width", "stackup.layers[3].er".
func indexLines(data []byte) map[string]int {
	lines := map[string]int{}
	p := unstable.Parser{KeepComments: false}
	p.Reset(data)
	counts := map[string]int{}
	prefix := ""
	lineOf := func(n *unstable.Node) int {
		if n.Raw.Length == 0 && n.Raw.Offset == 0 {
			return 0
		}
		return p.Shape(n.Raw).Start.Line
	}
	var value func(path string, n *unstable.Node)
	keyOf := func(it unstable.Iterator) (string, int) {
		var parts []string
		line := 0
		for it.Next() {
			k := it.Node()
			parts = append(parts, string(k.Data))
			if line == 0 {
				line = lineOf(k)
			}
		}
		return strings.Join(parts, "."), line
	}
	join := func(a, b string) string {
		if a == "" {
			return b
		}
		return a + "." + b
	}
	value = func(path string, n *unstable.Node) {
		switch n.Kind {
		case unstable.InlineTable:
			it := n.Children()
			for it.Next() {
				kv := it.Node()
				if kv.Kind != unstable.KeyValue {
					continue
				}
				k, l := keyOf(kv.Key())
				p := join(path, k)
				lines[p] = l
				value(p, kv.Value())
			}
		case unstable.Array:
			it := n.Children()
			i := 0
			for it.Next() {
				e := it.Node()
				if e.Kind == unstable.Comment {
					continue
				}
				p := fmt.Sprintf("%s[%d]", path, i)
				if l := lineOf(e); l > 0 {
					lines[p] = l
				}
				value(p, e)
				i++
			}
		}
	}
	for p.NextExpression() {
		e := p.Expression()
		switch e.Kind {
		case unstable.Table:
			k, l := keyOf(e.Key())
			prefix = k
			lines[prefix] = l
		case unstable.ArrayTable:
			k, l := keyOf(e.Key())
			i := counts[k]
			counts[k] = i + 1
			prefix = fmt.Sprintf("%s[%d]", k, i)
			lines[prefix] = l
		case unstable.KeyValue:
			k, l := keyOf(e.Key())
			path := join(prefix, k)
			lines[path] = l
			// Inline tables and arrays on one line share it; elements on later lines get their own.
			value(path, e.Value())
		}
	}
	return lines
}

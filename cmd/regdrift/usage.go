package main

import (
	_ "embed"
	"strings"
	"sync"
)

// docSource is doc.go itself: the package comment is the program's usage
// text, so that -h, godoc and the README cannot drift apart.
//
//go:embed doc.go
var docSource string

// commandDoc is one command's section of doc.go.
type commandDoc struct {
	usage string // "map JOB [-o DIR] ..." (without "regdrift ")
	short string // the one-sentence summary
	long  string // the paragraphs after it
}

var docs struct {
	once     sync.Once
	overview string
	commands map[string]commandDoc
}

// parseDoc splits the package comment of doc.go: the overview before the
// first heading, then one "# name" section per command, each starting with
// a "Usage:" block holding one indented "regdrift ..." line and the summary
// paragraph.
func parseDoc() {
	text := docSource
	if i := strings.Index(text, "/*\n"); i >= 0 {
		text = text[i+3:]
	}
	if i := strings.Index(text, "*/"); i >= 0 {
		text = text[:i]
	}
	parts := strings.Split("\n"+text, "\n# ")
	docs.overview = strings.TrimLeft(parts[0], "\n")
	docs.commands = map[string]commandDoc{}
	for _, p := range parts[1:] {
		name, body, _ := strings.Cut(p, "\n")
		paras := strings.Split(strings.Trim(body, "\n"), "\n\n")
		var d commandDoc
		i := 0
		if i < len(paras) && paras[i] == "Usage:" {
			i++
		}
		if i < len(paras) {
			d.usage = strings.TrimPrefix(strings.TrimSpace(paras[i]), "regdrift ")
			i++
		}
		if i < len(paras) {
			d.short = strings.Join(strings.Fields(paras[i]), " ")
			i++
		}
		long := strings.Join(paras[i:], "\n\n")
		d.long = strings.ReplaceAll(long, "\n\t", "\n    ")
		if strings.HasPrefix(d.long, "\t") {
			d.long = "    " + d.long[1:]
		}
		docs.commands[strings.TrimSpace(name)] = d
	}
}

// docOverview returns the text before the first command section of doc.go.
func docOverview() string {
	docs.once.Do(parseDoc)
	return docs.overview
}

// docFor returns the section of doc.go for the command name.
func docFor(name string) commandDoc {
	docs.once.Do(parseDoc)
	return docs.commands[name]
}

package drift

import (
	"github.com/regdrift/regdrift/panel"
	"github.com/regdrift/regdrift/panel/section"
	"github.com/regdrift/regdrift/registration"
	"github.com/regdrift/regdrift/registration/process"
)

// Input is what the analysis needs of one panel design: its layout, the
// coupler sites expanded from it, the cross-sections they name and the
// registration model.
type Input struct {
	Title     string
	Source    string // where it was read from, reported as "job" in the JSON forms
	Layout    panel.Layout
	Instances []panel.Instance
	Sites     []panel.Site
	Sections  []*section.Section
	Model     *registration.Model
	// Process holds the process variation terms; nil (or empty) for
	// registration alone.
	Process *process.Model
}

// SectionIndex returns the index of the section named name, or −1.
func (in *Input) SectionIndex(name string) int {
	for i, s := range in.Sections {
		if s.Name == name {
			return i
		}
	}
	return -1
}

// ArrayExtents returns, per array of the layout, the rectangle its parts
// cover (panel.ArrayExtents).
func (in *Input) ArrayExtents() []panel.Rect {
	return panel.ArrayExtents(len(in.Layout.Arrays), in.Instances)
}

// PartName returns the name of the part instance of site s, or "".
func (in *Input) PartName(s panel.Site) string {
	if s.Instance >= 0 && s.Instance < len(in.Instances) {
		return in.Instances[s.Instance].Name
	}
	return ""
}

// Settings are the field-solver settings of an analysis. A nil *Settings,
// like the zero value, means all defaults.
type Settings struct {
	// Accuracy is the target relative error of the solved capacitances; 0
	// means section.DefaultAccuracy (0.1 %).
	Accuracy float64
	// CacheDir is the directory of the solve cache; "" means the user cache
	// directory (os.UserCacheDir()/regdrift).
	CacheDir string
	// NoCache solves every curve again and neither reads nor writes the cache.
	NoCache bool
	// Workers is the number of parallel solves in a sweep; 0 means one per CPU.
	Workers int
	// CacheWarning, if not nil, receives each *section.CacheWarning of a
	// solve (a damaged entry recomputed, an entry that could not be written):
	// the solve itself succeeded, so these are not errors. Nil drops them.
	CacheWarning func(error)
	// Sensitivities solves every point's derivatives with respect to each
	// parameter of the section as well (section.Settings.Sensitivities).
	Sensitivities bool
}

// warnCache passes the cache warnings of c to s.CacheWarning.
func (s *Settings) warnCache(c *section.Curve) {
	if s == nil || s.CacheWarning == nil || c == nil {
		return
	}
	for _, w := range c.CacheWarnings {
		s.CacheWarning(w)
	}
}

// Solver returns the settings of the cross-section solver.
func (s *Settings) Solver() *section.Settings {
	if s == nil {
		return &section.Settings{}
	}
	return &section.Settings{Accuracy: s.Accuracy, Workers: s.Workers, Sensitivities: s.Sensitivities}
}

func (s *Settings) cache() (dir string, off bool) {
	if s == nil {
		return "", false
	}
	return s.CacheDir, s.NoCache
}

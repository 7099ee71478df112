package scan

import (
	"fmt"
	"time"

	"goniod/daemon/instrument"
	"goniod/daemon/validate"
)

// MaxSeries bounds the scans of one series.
const MaxSeries = 100

// Validate checks what a series adds to its scan: the source settings and the settle time. The scan itself is
// checked by NewPlan for each setting.
func (s SeriesRequest) Validate(cfg *instrument.Config) error {
	var es validate.Errors
	switch {
	case len(s.Sources) == 0:
		es.Add("series.sources", "empty: a series needs at least one source setting (e.g. 12, 15, 20, 25, 30 kV)")
	case len(s.Sources) > MaxSeries:
		es.Add("series.sources", "%d settings is more than the maximum of %d", len(s.Sources), MaxSeries)
	}
	for i, src := range s.Sources {
		cfg.CheckSource(&es, fmt.Sprintf("series.sources[%d]", i), src.KV, src.MA)
	}
	if s.Settle < 0 || s.Settle > time.Hour {
		es.Add("series.settle", "%v is outside the allowed range [0s, 1h]", s.Settle)
	}
	return es.Err()
}

package engine

import (
	"fmt"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/daemon/validate"
)

// maxSeries bounds the scans of one series.
const maxSeries = 100

func validateSeries(sr scan.SeriesRequest, cfg instrument.Config) error {
	var es validate.Errors
	if len(sr.Sources) == 0 {
		es.Add("series.sources", "empty: a series needs at least one source setting (e.g. 12, 15, 20, 25, 30 kV)")
	}
	if len(sr.Sources) > maxSeries {
		es.Add("series.sources", "%d settings is more than the maximum of %d", len(sr.Sources), maxSeries)
	}
	for i, s := range sr.Sources {
		cfg.CheckSource(&es, fmt.Sprintf("series.sources[%d]", i), s.KV, s.MA)
	}
	if sr.Settle < 0 || sr.Settle.Hours() > 1 {
		es.Add("series.settle", "%v is outside the allowed range [0s, 1h]", sr.Settle)
	}
	return es.Err()
}

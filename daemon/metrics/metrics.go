// Package metrics exports goniod's state in the Prometheus exposition format. Scrapes read cached state only:
// a scrape never touches the instrument.
package metrics

import (
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/driver"
	goniodv1 "goniod/proto/goniod/v1"
)

// Scans is what the metrics read from the scan engine at scrape time (from memory, never from the disk).
type Scans interface {
	CountByState() map[scan.State]int
}

// Metrics holds goniod's collectors. It is an engine.Observer and the safety monitor's event recorder.
type Metrics struct {
	pointsPersisted prometheus.Counter
	counts          prometheus.Counter
	overhead        prometheus.Histogram
	scansByState    *prometheus.CounterVec
	progress        *prometheus.GaugeVec
	lastProgress    prometheus.Gauge
	safety          *prometheus.CounterVec
	now             func() time.Time

	mu      sync.Mutex
	running string // ID of the scan whose progress is exported
}

// New registers goniod's metrics on reg: the controller's cached state and the engine's scans are read at
// scrape time, points and state changes arrive through the Observer methods.
func New(reg prometheus.Registerer, ctl *instrument.Controller, scans Scans) *Metrics {
	m := &Metrics{
		pointsPersisted: prometheus.NewCounter(prometheus.CounterOpts{Name: "goniod_points_persisted_total",
			Help: "Scan points stored durably (fsynced)."}),
		counts: prometheus.NewCounter(prometheus.CounterOpts{Name: "goniod_detector_counts_total",
			Help: "Raw detector counts of all stored points."}),
		overhead: prometheus.NewHistogram(prometheus.HistogramOpts{Name: "goniod_point_overhead_seconds",
			Help:    "Daemon time per point outside the instrument's moves and counting (planning, storing, publishing).",
			Buckets: prometheus.ExponentialBuckets(5e-6, 2.5, 12)}),
		scansByState: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "goniod_scan_transitions_total",
			Help: "Scan state changes, by the state entered."}, []string{"state"}),
		progress: prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: "goniod_scan_progress_ratio",
			Help: "Points done over points planned of the scan that runs."}, []string{"scan"}),
		lastProgress: prometheus.NewGauge(prometheus.GaugeOpts{Name: "goniod_scan_last_progress_timestamp_seconds",
			Help: "Unix time of the running scan's latest point, or of its start when it has none yet."}),
		safety: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "goniod_safety_events_total",
			Help: "Safety events: the interlock opening, high voltage switched off by the safety policy."}, []string{"event"}),
		now: time.Now,
	}
	reg.MustRegister(m.pointsPersisted, m.counts, m.overhead, m.scansByState, m.progress, m.lastProgress, m.safety,
		&stateCollector{ctl: ctl, scans: scans})
	return m
}

// PointStored updates the point metrics.
func (m *Metrics) PointStored(rec *scan.Record, p *goniodv1.Point, overhead time.Duration) {
	m.pointsPersisted.Inc()
	m.counts.Add(float64(p.Counts))
	m.overhead.Observe(overhead.Seconds())
	m.lastProgress.Set(float64(m.now().UnixNano()) / 1e9)
	if rec.PointsTotal > 0 {
		m.progress.WithLabelValues(rec.ID).Set(float64(p.Index+1) / float64(rec.PointsTotal))
	}
}

// StateChanged counts state changes; the progress of a scan is exported while it runs.
func (m *Metrics) StateChanged(rec *scan.Record) {
	m.scansByState.WithLabelValues(string(rec.State)).Inc()
	m.mu.Lock()
	defer m.mu.Unlock()
	switch {
	case rec.State == scan.Running:
		if m.running != "" && m.running != rec.ID {
			m.progress.DeleteLabelValues(m.running)
		}
		m.running = rec.ID
		m.lastProgress.Set(float64(m.now().UnixNano()) / 1e9)
		if rec.PointsTotal > 0 {
			m.progress.WithLabelValues(rec.ID).Set(float64(rec.PointsDone) / float64(rec.PointsTotal))
		}
	case rec.ID == m.running:
		m.progress.DeleteLabelValues(rec.ID)
		m.running = ""
	}
}

// KnowSafetyEvents exports the named safety events at zero, so alerts and graphs see them before they happen.
func (m *Metrics) KnowSafetyEvents(events ...string) {
	for _, e := range events {
		m.safety.WithLabelValues(e)
	}
}

// SafetyEvent counts one safety event.
func (m *Metrics) SafetyEvent(event string) { m.safety.WithLabelValues(event).Inc() }

// allStates are the scan states exported by goniod_scans, zero included.
var allStates = []scan.State{scan.Queued, scan.Running, scan.Paused, scan.Interrupted, scan.Held, scan.Done, scan.Failed, scan.Cancelled}

// stateCollector exports the controller's cached state and the scans' states at scrape time.
type stateCollector struct {
	ctl   *instrument.Controller
	scans Scans
}

var (
	descAxis = prometheus.NewDesc("goniod_axis_position_degrees", "Read-back angle of an axis, zero offset applied.",
		[]string{"axis"}, nil)
	descKV        = prometheus.NewDesc("goniod_tube_voltage_volts", "Tube voltage setting.", nil, nil)
	descMA        = prometheus.NewDesc("goniod_tube_current_amperes", "Tube current setting.", nil, nil)
	descHV        = prometheus.NewDesc("goniod_high_voltage_on", "1 when the tube's high voltage is on.", nil, nil)
	descInterlock = prometheus.NewDesc("goniod_interlock_closed", "1 when the enclosure interlock is closed.", nil, nil)
	descLink      = prometheus.NewDesc("goniod_link_up", "1 when the link to the instrument is up.", nil, nil)
	descLinkErr   = prometheus.NewDesc("goniod_link_errors_total", "Failed exchanges with the instrument.", nil, nil)
	descLinkTO    = prometheus.NewDesc("goniod_link_timeouts_total", "Exchanges with the instrument that timed out.", nil, nil)
	descLinkRe    = prometheus.NewDesc("goniod_link_reconnects_total", "Reconnections to the instrument.", nil, nil)
	descRate      = prometheus.NewDesc("goniod_count_rate_per_second", "Raw count rate of the latest count (scan point or single count).", nil, nil)
	descCorrected = prometheus.NewDesc("goniod_count_rate_corrected_per_second", "Dead-time-corrected count rate of the latest count.", nil, nil)
	descUpdated   = prometheus.NewDesc("goniod_state_updated_timestamp_seconds", "Unix time the cached instrument state was last read from the instrument.", nil, nil)
	descQueue     = prometheus.NewDesc("goniod_queue_length", "Scans waiting in the queue.", nil, nil)
	descScans     = prometheus.NewDesc("goniod_scans", "Scans known to the daemon, by state.", []string{"state"}, nil)
	descInfo      = prometheus.NewDesc("goniod_instrument_info", "The instrument served: name, driver, anode and crystal (value 1).",
		[]string{"instrument", "driver", "anode", "crystal"}, nil)
)

func (c *stateCollector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{descAxis, descKV, descMA, descHV, descInterlock, descLink, descLinkErr, descLinkTO,
		descLinkRe, descRate, descCorrected, descUpdated, descQueue, descScans, descInfo} {
		ch <- d
	}
}

func b2f(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

func (c *stateCollector) Collect(ch chan<- prometheus.Metric) {
	st := c.ctl.State()
	cfg := c.ctl.Config()
	gauge := func(d *prometheus.Desc, v float64, labels ...string) {
		ch <- prometheus.MustNewConstMetric(d, prometheus.GaugeValue, v, labels...)
	}
	counter := func(d *prometheus.Desc, v uint64) {
		ch <- prometheus.MustNewConstMetric(d, prometheus.CounterValue, float64(v))
	}
	for _, a := range cfg.Axes {
		if deg, ok := st.Positions[a.Name]; ok {
			gauge(descAxis, deg, a.Name)
		}
	}
	gauge(descKV, st.Source.KV*1e3)
	gauge(descMA, st.Source.MA*1e-3)
	gauge(descHV, b2f(st.Source.HighVoltage))
	gauge(descInterlock, b2f(st.InterlockClosed))
	gauge(descLink, b2f(st.Link.State == driver.LinkUp))
	counter(descLinkErr, st.Link.Errors)
	counter(descLinkTO, st.Link.Timeouts)
	counter(descLinkRe, st.Link.Reconnects)
	gauge(descRate, st.RateCPS)
	gauge(descCorrected, st.CorrectedRateCPS)
	if !st.Updated.IsZero() {
		gauge(descUpdated, float64(st.Updated.UnixNano())/1e9)
	}
	gauge(descInfo, 1, cfg.Name, cfg.Driver, cfg.Tube.Anode, cfg.Crystal)
	byState := c.scans.CountByState()
	gauge(descQueue, float64(byState[scan.Queued]))
	for _, s := range allStates {
		gauge(descScans, float64(byState[s]), string(s))
	}
}

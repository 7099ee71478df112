// Package metrics exports goniod's state in the Prometheus exposition format. Scrapes read cached state only:
// a scrape never touches the instrument.
package metrics

import (
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"goniod/daemon/instrument"
	"goniod/daemon/scan"
	"goniod/driver"
	goniodv1 "goniod/proto/goniod/v1"
)

// Metrics holds goniod's collectors. It is an engine.Observer.
type Metrics struct {
	pointsPersisted prometheus.Counter
	counts          prometheus.Counter
	overhead        prometheus.Histogram
	rate            prometheus.Gauge
	correctedRate   prometheus.Gauge
	scansByState    *prometheus.CounterVec
	progress        *prometheus.GaugeVec
}

// New registers goniod's metrics on reg. state supplies the cached instrument state and queue length.
func New(reg prometheus.Registerer, ctl *instrument.Controller, queueLength func() int) *Metrics {
	m := &Metrics{
		pointsPersisted: prometheus.NewCounter(prometheus.CounterOpts{Name: "goniod_points_persisted_total",
			Help: "Scan points stored durably (fsynced)."}),
		counts: prometheus.NewCounter(prometheus.CounterOpts{Name: "goniod_detector_counts_total",
			Help: "Raw detector counts of all stored points."}),
		overhead: prometheus.NewHistogram(prometheus.HistogramOpts{Name: "goniod_point_overhead_seconds",
			Help:    "Daemon time per point outside the instrument (moves, counting, status).",
			Buckets: prometheus.ExponentialBuckets(5e-6, 2.5, 12)}),
		rate: prometheus.NewGauge(prometheus.GaugeOpts{Name: "goniod_count_rate_per_second",
			Help: "Raw count rate of the latest point."}),
		correctedRate: prometheus.NewGauge(prometheus.GaugeOpts{Name: "goniod_count_rate_corrected_per_second",
			Help: "Dead-time-corrected count rate of the latest point."}),
		scansByState: prometheus.NewCounterVec(prometheus.CounterOpts{Name: "goniod_scan_transitions_total",
			Help: "Scan state changes, by the state entered."}, []string{"state"}),
		progress: prometheus.NewGaugeVec(prometheus.GaugeOpts{Name: "goniod_scan_progress_ratio",
			Help: "Points done over points planned of the scan that runs (0 when none)."}, []string{"scan"}),
	}
	reg.MustRegister(m.pointsPersisted, m.counts, m.overhead, m.rate, m.correctedRate, m.scansByState, m.progress,
		&stateCollector{ctl: ctl, queueLength: queueLength})
	return m
}

// PointStored updates the point metrics.
func (m *Metrics) PointStored(rec *scan.Record, p *goniodv1.Point, overhead time.Duration) {
	m.pointsPersisted.Inc()
	m.counts.Add(float64(p.Counts))
	m.overhead.Observe(overhead.Seconds())
	m.rate.Set(p.RateCps)
	m.correctedRate.Set(p.CorrectedRateCps)
	if rec.PointsTotal > 0 {
		m.progress.WithLabelValues(rec.ID).Set(float64(p.Index+1) / float64(rec.PointsTotal))
	}
}

// StateChanged counts state changes and drops the progress of scans that stopped running.
func (m *Metrics) StateChanged(rec *scan.Record) {
	m.scansByState.WithLabelValues(string(rec.State)).Inc()
	if rec.State != scan.Running {
		m.progress.DeleteLabelValues(rec.ID)
	}
}

// stateCollector exports the controller's cached state at scrape time.
type stateCollector struct {
	ctl         *instrument.Controller
	queueLength func() int
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
	descQueue     = prometheus.NewDesc("goniod_queue_length", "Scans waiting in the queue.", nil, nil)
)

func (c *stateCollector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{descAxis, descKV, descMA, descHV, descInterlock, descLink, descLinkErr, descLinkTO, descLinkRe, descQueue} {
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
	for axis, deg := range st.Positions {
		ch <- prometheus.MustNewConstMetric(descAxis, prometheus.GaugeValue, deg, axis)
	}
	ch <- prometheus.MustNewConstMetric(descKV, prometheus.GaugeValue, st.Source.KV*1e3)
	ch <- prometheus.MustNewConstMetric(descMA, prometheus.GaugeValue, st.Source.MA*1e-3)
	ch <- prometheus.MustNewConstMetric(descHV, prometheus.GaugeValue, b2f(st.Source.HighVoltage))
	ch <- prometheus.MustNewConstMetric(descInterlock, prometheus.GaugeValue, b2f(st.InterlockClosed))
	ch <- prometheus.MustNewConstMetric(descLink, prometheus.GaugeValue, b2f(st.Link.State == driver.LinkUp))
	ch <- prometheus.MustNewConstMetric(descLinkErr, prometheus.CounterValue, float64(st.Link.Errors))
	ch <- prometheus.MustNewConstMetric(descLinkTO, prometheus.CounterValue, float64(st.Link.Timeouts))
	ch <- prometheus.MustNewConstMetric(descLinkRe, prometheus.CounterValue, float64(st.Link.Reconnects))
	ch <- prometheus.MustNewConstMetric(descQueue, prometheus.GaugeValue, float64(c.queueLength()))
}

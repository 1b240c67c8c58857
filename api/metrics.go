package api

import (
	"net/http"
	"strconv"
	"time"

	"github.com/labstack/echo/v4"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"
)

// metrics are the service's Prometheus metrics, in a registry of their own
// (so that several servers can live in one process, as in tests).
type metrics struct {
	reg        *prometheus.Registry
	labels     *prometheus.CounterVec
	leases     *prometheus.CounterVec
	liveLeases prometheus.Gauge
	openItems  prometheus.Gauge
	rounds     *prometheus.HistogramVec
	http       *prometheus.HistogramVec
}

func newMetrics() *metrics {
	m := &metrics{reg: prometheus.NewRegistry()}
	m.labels = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: "handoff_labels_received_total",
		Help: "Labels sent by people, by outcome: stored (committed), duplicate (a retry of a stored label), refused.",
	}, []string{"outcome"})
	m.leases = prometheus.NewCounterVec(prometheus.CounterOpts{
		Name: "handoff_leases_total",
		Help: "Lease events: granted, answered, skipped, expired.",
	}, []string{"event"})
	m.liveLeases = prometheus.NewGauge(prometheus.GaugeOpts{
		Name: "handoff_leases_live",
		Help: "Items handed out and not yet answered, skipped or expired.",
	})
	m.openItems = prometheus.NewGauge(prometheus.GaugeOpts{
		Name: "handoff_items_open",
		Help: "Items with fewer labels than their target.",
	})
	m.rounds = prometheus.NewHistogramVec(prometheus.HistogramOpts{
		Name:    "handoff_round_duration_seconds",
		Help:    "How long rounds run from the service took, by result (ok, error).",
		Buckets: prometheus.ExponentialBuckets(0.05, 2, 14),
	}, []string{"result"})
	m.http = prometheus.NewHistogramVec(prometheus.HistogramOpts{
		Name:    "handoff_http_request_duration_seconds",
		Help:    "HTTP request latencies by method, route pattern and status code.",
		Buckets: []float64{.0005, .001, .0025, .005, .01, .025, .05, .1, .25, .5, 1, 2.5, 5, 10},
	}, []string{"method", "route", "code"})
	m.reg.MustRegister(m.labels, m.leases, m.liveLeases, m.openItems, m.rounds, m.http,
		collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	for _, o := range []string{"stored", "duplicate", "refused"} {
		m.labels.WithLabelValues(o)
	}
	for _, e := range []string{"granted", "answered", "skipped", "expired"} {
		m.leases.WithLabelValues(e)
	}
	m.rounds.WithLabelValues("ok")
	m.rounds.WithLabelValues("error")
	return m
}

func (m *metrics) handler() http.Handler {
	return promhttp.HandlerFor(m.reg, promhttp.HandlerOpts{Registry: m.reg})
}

// observe records each request's latency under its route pattern (never the
// raw path, so the number of series stays bounded).
func (m *metrics) observe(next echo.HandlerFunc) echo.HandlerFunc {
	return func(c echo.Context) error {
		start := time.Now()
		err := next(c)
		status := c.Response().Status
		if err != nil {
			status = statusOf(err)
		}
		route := c.Path()
		if route == "" {
			route = "unmatched"
		}
		m.http.WithLabelValues(c.Request().Method, route, strconv.Itoa(status)).Observe(time.Since(start).Seconds())
		return err
	}
}

func statusOf(err error) int {
	s, _, _ := classify(err)
	return s
}

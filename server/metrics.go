package server

import (
	"fmt"
	"net/http"
	"runtime"
	"sort"
	"sync"
	"sync/atomic"
	"time"
)

// metrics are the server's counters, served in the Prometheus text format
// at /metrics [pub: Prometheus exposition formats, text format 0.0.4].
type metrics struct {
	readings    atomic.Int64
	duplicates  atomic.Int64
	rejected    atomic.Int64
	rateLimited atomic.Int64
	started     time.Time

	// latency: method → *histogram, lock-free on the path of every call.
	latency sync.Map
}

// latencyBuckets are the upper bounds, in seconds, of the RPC latency
// histogram.
var latencyBuckets = []float64{0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.25, 0.5, 1, 5}

type histogram struct {
	counts []atomic.Int64 // per bucket, then +Inf
	sumNs  atomic.Int64
	n      atomic.Int64
}

func newMetrics() *metrics { return &metrics{started: time.Now()} }

func (m *metrics) observe(method string, d time.Duration) {
	v, ok := m.latency.Load(method)
	if !ok {
		v, _ = m.latency.LoadOrStore(method, &histogram{counts: make([]atomic.Int64, len(latencyBuckets)+1)})
	}
	h := v.(*histogram)
	h.counts[sort.SearchFloat64s(latencyBuckets, d.Seconds())].Add(1)
	h.sumNs.Add(int64(d))
	h.n.Add(1)
}

func (s *Server) serveMetrics(w http.ResponseWriter, r *http.Request) {
	m := s.metrics
	w.Header().Set("Content-Type", "text/plain; version=0.0.4")
	counter := func(name, help string, v int64) {
		fmt.Fprintf(w, "# HELP %s %s\n# TYPE %s counter\n%s %d\n", name, help, name, name, v)
	}
	counter("fluxroom_readings_stored_total", "Readings stored.", m.readings.Load())
	counter("fluxroom_readings_duplicate_total", "Submissions of a reading id already stored.", m.duplicates.Load())
	counter("fluxroom_rejected_inputs_total", "Requests answered InvalidArgument.", m.rejected.Load())
	counter("fluxroom_rate_limited_total", "Readings refused by a station's rate limit.", m.rateLimited.Load())
	if used, err := s.db.UsedBytes(); err == nil {
		fmt.Fprintf(w, "# HELP fluxroom_db_used_bytes The database file up to its last page in use.\n# TYPE fluxroom_db_used_bytes gauge\nfluxroom_db_used_bytes %d\n", used)
	}
	fmt.Fprintf(w, "# HELP fluxroom_watchers Open room streams.\n# TYPE fluxroom_watchers gauge\nfluxroom_watchers %d\n", s.hub.watcherCount())
	// The Go runtime's memory, under the names Prometheus' Go client uses.
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	gauge := func(name, help string, v uint64) {
		fmt.Fprintf(w, "# HELP %s %s\n# TYPE %s gauge\n%s %d\n", name, help, name, name, v)
	}
	gauge("go_goroutines", "Number of goroutines that currently exist.", uint64(runtime.NumGoroutine()))
	gauge("go_memstats_heap_inuse_bytes", "Number of heap bytes that are in use.", ms.HeapInuse)
	gauge("go_memstats_stack_inuse_bytes", "Number of bytes in use by the stack allocator.", ms.StackInuse)
	gauge("go_memstats_sys_bytes", "Number of bytes obtained from system.", ms.Sys)
	fmt.Fprintf(w, "# HELP fluxroom_uptime_seconds Seconds since the server started.\n# TYPE fluxroom_uptime_seconds gauge\nfluxroom_uptime_seconds %.0f\n", time.Since(m.started).Seconds())
	var methods []string
	m.latency.Range(func(k, _ any) bool { methods = append(methods, k.(string)); return true })
	sort.Strings(methods)
	fmt.Fprintf(w, "# HELP fluxroom_rpc_seconds RPC latency.\n# TYPE fluxroom_rpc_seconds histogram\n")
	for _, meth := range methods {
		v, _ := m.latency.Load(meth)
		h := v.(*histogram)
		// Read the count first: a call observed meanwhile only makes the
		// buckets run ahead of it, never a bucket above the count.
		n := h.n.Load()
		var cum int64
		for i, b := range latencyBuckets {
			cum += h.counts[i].Load()
			fmt.Fprintf(w, "fluxroom_rpc_seconds_bucket{method=%q,le=\"%g\"} %d\n", meth, b, min(cum, n))
		}
		fmt.Fprintf(w, "fluxroom_rpc_seconds_bucket{method=%q,le=\"+Inf\"} %d\n", meth, n)
		fmt.Fprintf(w, "fluxroom_rpc_seconds_sum{method=%q} %g\nfluxroom_rpc_seconds_count{method=%q} %d\n", meth, time.Duration(h.sumNs.Load()).Seconds(), meth, n)
	}
}

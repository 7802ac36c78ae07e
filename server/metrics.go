package server

import (
	"fmt"
	"io"
	"net/http"
	"runtime"
	"sort"
	"strings"
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
	// commits times the store's group commits, which every acknowledgement
	// waits for; committed counts the readings they held.
	commits   *histogram
	committed atomic.Int64
	// judgeLag times, for each judge pass, its oldest reading's wait from
	// its commit to its bench's state being published: how far the room's
	// dashboards trail the file.
	judgeLag *histogram
	// judgings counts benches judged by room judges: over the readings
	// stored, how much of the judging coalesces.
	judgings atomic.Int64
}

// latencyBuckets are the upper bounds, in seconds, of the RPC latency
// histogram, fine below 5 ms where a lightly loaded server's durable
// readings fall; commitBuckets of the commit histogram, where a commit with
// its two fsyncs takes about a millisecond on a local disk.
var (
	latencyBuckets = []float64{0.0005, 0.001, 0.0015, 0.002, 0.003, 0.005, 0.01, 0.02, 0.05, 0.1, 0.25, 0.5, 1, 5}
	commitBuckets  = []float64{0.00025, 0.0005, 0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.25, 1}
)

type histogram struct {
	bounds []float64
	counts []atomic.Int64 // per bucket, then +Inf
	sumNs  atomic.Int64
	n      atomic.Int64
}

func newHistogram(bounds []float64) *histogram {
	return &histogram{bounds: bounds, counts: make([]atomic.Int64, len(bounds)+1)}
}

func (h *histogram) observe(d time.Duration) {
	h.counts[sort.SearchFloat64s(h.bounds, d.Seconds())].Add(1)
	h.sumNs.Add(int64(d))
	h.n.Add(1)
}

// write prints the histogram in the text format; labels, if any, go
// first inside the braces ("method=\"…\",").
func (h *histogram) write(w io.Writer, name, labels string) {
	// Read the count first: a value observed meanwhile only makes the
	// buckets run ahead of it, never a bucket above the count.
	n := h.n.Load()
	var cum int64
	for i, b := range h.bounds {
		cum += h.counts[i].Load()
		fmt.Fprintf(w, "%s_bucket{%sle=\"%g\"} %d\n", name, labels, b, min(cum, n))
	}
	fmt.Fprintf(w, "%s_bucket{%sle=\"+Inf\"} %d\n", name, labels, n)
	braces := ""
	if labels != "" {
		braces = "{" + strings.TrimSuffix(labels, ",") + "}"
	}
	fmt.Fprintf(w, "%s_sum%s %g\n%s_count%s %d\n", name, braces, time.Duration(h.sumNs.Load()).Seconds(), name, braces, n)
}

func newMetrics() *metrics {
	return &metrics{started: time.Now(), commits: newHistogram(commitBuckets), judgeLag: newHistogram(latencyBuckets)}
}

func (m *metrics) observe(method string, d time.Duration) {
	v, ok := m.latency.Load(method)
	if !ok {
		v, _ = m.latency.LoadOrStore(method, newHistogram(latencyBuckets))
	}
	v.(*histogram).observe(d)
}

func (m *metrics) commit(readings int, took time.Duration) {
	m.commits.observe(took)
	m.committed.Add(int64(readings))
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
		v.(*histogram).write(w, "fluxroom_rpc_seconds", fmt.Sprintf("method=%q,", meth))
	}
	fmt.Fprintf(w, "# HELP fluxroom_commit_seconds Group commits of readings, with their fsyncs; every acknowledgement waits for one.\n# TYPE fluxroom_commit_seconds histogram\n")
	m.commits.write(w, "fluxroom_commit_seconds", "")
	counter("fluxroom_committed_readings_total", "Readings in group commits (over fluxroom_commit_seconds_count: readings per commit).", m.committed.Load())
	fmt.Fprintf(w, "# HELP fluxroom_judge_lag_seconds Per judge pass, its oldest reading's time from commit to its bench's state published.\n# TYPE fluxroom_judge_lag_seconds histogram\n")
	m.judgeLag.write(w, "fluxroom_judge_lag_seconds", "")
	counter("fluxroom_bench_judgings_total", "Benches judged for their room after new readings (over fluxroom_readings_stored_total: how much judging coalesces).", m.judgings.Load())
}

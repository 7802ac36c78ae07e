package server

import (
	"bytes"
	"context"
	"fmt"
	"image/png"
	"io"
	"net/http"
	"strconv"
	"strings"
	"testing"
	"time"
)

// The runtime's profiles answer the instructor key only; the metrics
// anyone on the network may read carry the memory gauges.
func TestDebugAndMetricsEndpoints(t *testing.T) {
	r := startRig(t)
	get := func(path, key string) (int, string) {
		t.Helper()
		req, _ := http.NewRequest(http.MethodGet, "http://"+r.addr+path, nil)
		if key != "" {
			req.Header.Set("Authorization", "Bearer "+key)
		}
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		defer resp.Body.Close()
		b, _ := io.ReadAll(resp.Body)
		return resp.StatusCode, string(b)
	}
	for _, tc := range []struct {
		path, key string
		want      int
	}{
		{"/debug/pprof/", "", http.StatusUnauthorized},
		{"/debug/pprof/heap", "not-the-key-0123456789", http.StatusUnauthorized},
		{"/debug/pprof/", testKey, http.StatusOK},
		{"/debug/pprof/goroutine?debug=1", testKey, http.StatusOK},
	} {
		if code, _ := get(tc.path, tc.key); code != tc.want {
			t.Errorf("GET %s with key %q: %d, want %d", tc.path, tc.key, code, tc.want)
		}
	}
	if code, body := get("/metrics", ""); code != http.StatusOK || !strings.Contains(body, "go_memstats_heap_inuse_bytes ") || !strings.Contains(body, "go_goroutines ") ||
		!strings.Contains(body, "fluxroom_db_used_bytes ") {
		t.Errorf("/metrics: %d without the Go memory gauges:\n%s", code, body)
	}
}

// Every reading stored went through a timed group commit, and /metrics says
// so: the commit histogram counts the commits, the counter their readings.
func TestCommitMetrics(t *testing.T) {
	r := startRig(t)
	sess, benches := setupRoom(t, r)
	const n = 7
	for i := range n {
		if _, err := submit(context.Background(), r, sess.SessionId, benches[i%2].BenchId, fmt.Sprintf("m%d", i), 0.5+0.5*float64(i), 0.024*(1+float64(i))); err != nil {
			t.Fatal(err)
		}
	}
	resp, err := http.Get("http://" + r.addr + "/metrics")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	values := map[string]float64{}
	for _, line := range strings.Split(string(b), "\n") {
		if name, v, ok := strings.Cut(line, " "); ok && !strings.HasPrefix(line, "#") {
			f, err := strconv.ParseFloat(v, 64)
			if err == nil {
				values[name] = f
			}
		}
	}
	commits, readings := values["fluxroom_commit_seconds_count"], values["fluxroom_committed_readings_total"]
	// Each submit waited for its answer, so each had a commit of its own.
	if commits != n || readings != n {
		t.Errorf("commits %v holding %v readings; want %d and %d\n%s", commits, readings, n, n, b)
	}
	if inf := values[`fluxroom_commit_seconds_bucket{le="+Inf"}`]; inf != commits {
		t.Errorf("commit histogram's +Inf bucket %v, count %v", inf, commits)
	}
	if values["fluxroom_commit_seconds_sum"] <= 0 {
		t.Errorf("commits took no time in all: %v", values["fluxroom_commit_seconds_sum"])
	}
}

// TestJoinQRCode: /join.png draws the station link for a join code as a QR
// code image large enough to project; anything that is not a join code is
// refused.
func TestJoinQRCode(t *testing.T) {
	r := startRig(t)
	for _, tc := range []struct {
		code string
		want int
	}{
		{"K7Q2MX", http.StatusOK},
		{"k7q2mx", http.StatusBadRequest}, // not the code's alphabet
		{"K7Q2M", http.StatusBadRequest},
		{"K7Q2M0", http.StatusBadRequest}, // 0 is never in a code
		{"", http.StatusBadRequest},
	} {
		resp, err := http.Get("http://" + r.addr + "/join.png?code=" + tc.code)
		if err != nil {
			t.Fatal(err)
		}
		body, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if resp.StatusCode != tc.want {
			t.Errorf("code %q: status %d, want %d", tc.code, resp.StatusCode, tc.want)
			continue
		}
		if tc.want != http.StatusOK {
			continue
		}
		img, err := png.Decode(bytes.NewReader(body))
		if err != nil || resp.Header.Get("Content-Type") != "image/png" {
			t.Fatalf("code %q: %v, content type %q; want a PNG", tc.code, err, resp.Header.Get("Content-Type"))
		}
		if b := img.Bounds(); b.Dx() < 256 || b.Dx() != b.Dy() {
			t.Errorf("QR code image %v, want a square of at least 256 px", b)
		}
	}
}

// TestJudgeLagMetric: each judge pass records how long its oldest reading
// waited from its commit to its bench's state being published, and counts
// the benches it judged.
func TestJudgeLagMetric(t *testing.T) {
	r := startRig(t)
	sess, benches := setupRoom(t, r)
	for i := range 4 {
		if _, err := submit(context.Background(), r, sess.SessionId, benches[0].BenchId, fmt.Sprintf("l%d", i), float64(i), 0.48*float64(i)); err != nil {
			t.Fatal(err)
		}
	}
	var count, sum, judgings float64
	for try := 0; try < 100 && count == 0; try++ {
		time.Sleep(20 * time.Millisecond)
		resp, err := http.Get("http://" + r.addr + "/metrics")
		if err != nil {
			t.Fatal(err)
		}
		b, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		for _, line := range strings.Split(string(b), "\n") {
			if name, v, ok := strings.Cut(line, " "); ok {
				f, _ := strconv.ParseFloat(v, 64)
				switch name {
				case "fluxroom_judge_lag_seconds_count":
					count = f
				case "fluxroom_judge_lag_seconds_sum":
					sum = f
				case "fluxroom_bench_judgings_total":
					judgings = f
				}
			}
		}
	}
	if count < 1 || count > 4 || !(sum > 0) || sum > 5 {
		t.Errorf("judge lag: %v passes over 4 readings taking %v s; want 1–4 passes and a little time", count, sum)
	}
	// One bench: each pass judged it once. A pass counts its judging
	// before its lag, so a scrape may catch one more judging than lags.
	if judgings < count || judgings > 4 {
		t.Errorf("%v benches judged in %v passes over 4 readings of one bench; want one a pass", judgings, count)
	}
}

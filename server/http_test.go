package server

import (
	"io"
	"net/http"
	"strings"
	"testing"
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

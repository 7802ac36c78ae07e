package wasmclient

import "testing"

// TestRunProgress: the station's progress line, toward the readings a
// complete run needs.
func TestRunProgress(t *testing.T) {
	for _, tc := range []struct {
		counted, required int
		want              string
	}{
		{0, 8, "0 of 8 readings"},
		{5, 8, "5 of 8 readings"},
		{8, 8, "complete: 8 readings, 8 needed"},
		{11, 8, "complete: 11 readings, 8 needed"},
		{3, 0, "3 readings"}, // no policy known
	} {
		if got := runProgress(tc.counted, tc.required); got != tc.want {
			t.Errorf("runProgress(%d, %d) = %q, want %q", tc.counted, tc.required, got, tc.want)
		}
	}
}

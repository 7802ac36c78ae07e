// Package cpuprofile writes a CPU profile of the running program, for the
// --cpuprofile flags of fluxroom serve and of the load program.
package cpuprofile

import (
	"fmt"
	"os"
	"runtime/pprof"
)

// Start writes a CPU profile of this process to path (none when path is
// empty) until stop is called.
func Start(path string) (stop func(), err error) {
	if path == "" {
		return func() {}, nil
	}
	f, err := os.Create(path)
	if err != nil {
		return nil, fmt.Errorf("--cpuprofile: %w", err)
	}
	if err := pprof.StartCPUProfile(f); err != nil {
		f.Close()
		return nil, fmt.Errorf("--cpuprofile: %w", err)
	}
	return func() { pprof.StopCPUProfile(); f.Close() }, nil
}

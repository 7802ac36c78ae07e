package importcheck

import (
	"os"
	"os/exec"
	"strings"
	"testing"
)

const module = "example.com/fluxroom"

// deps lists the packages pkg depends on, for a target platform
// ("" for the host).
func deps(t *testing.T, goos, goarch, pkg string) []string {
	t.Helper()
	cmd := exec.Command("go", "list", "-deps", "-f", "{{.ImportPath}}", pkg)
	cmd.Dir = "../.."
	cmd.Env = os.Environ()
	if goos != "" {
		cmd.Env = append(cmd.Env, "GOOS="+goos, "GOARCH="+goarch)
	}
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("go list %s: %v", pkg, err)
	}
	return strings.Fields(string(out))
}

// violations returns the deps matching any forbidden prefix.
func violations(deps, forbidden []string) []string {
	var bad []string
	for _, d := range deps {
		for _, f := range forbidden {
			if d == f || strings.HasPrefix(d, f+"/") {
				bad = append(bad, d)
			}
		}
	}
	return bad
}

func TestImportRules(t *testing.T) {
	for _, tc := range []struct {
		name          string
		goos, goarch  string
		pkg           string
		forbidden     []string
		wantViolation bool // the rule's own control: it must catch this one
	}{
		{
			name: "browser build links no grpc-go, bbolt or server side",
			goos: "js", goarch: "wasm", pkg: module + "/wasmclient/app",
			forbidden: []string{"google.golang.org/grpc", "go.etcd.io/bbolt", module + "/store", module + "/server",
				module + "/proto/rpcpb", module + "/proto/recordpb", "connectrpc.com"},
		},
		{
			name: "domain depends on no adapter, wire or storage library",
			pkg:  module + "/domain",
			forbidden: []string{module + "/store", module + "/server", module + "/proto", module + "/wasmclient",
				"google.golang.org", "go.etcd.io", "connectrpc.com", "github.com/maxence-charriere"},
		},
		{
			name:      "store does not depend on server or the dashboard",
			pkg:       module + "/store",
			forbidden: []string{module + "/server", module + "/wasmclient", "google.golang.org/grpc"},
		},
		{
			name: "control: the server does link grpc-go", pkg: module + "/server",
			forbidden: []string{"google.golang.org/grpc"}, wantViolation: true,
		},
	} {
		t.Run(tc.name, func(t *testing.T) {
			bad := violations(deps(t, tc.goos, tc.goarch, tc.pkg), tc.forbidden)
			if tc.wantViolation && len(bad) == 0 {
				t.Errorf("%s: the check found no forbidden import, but one is there", tc.pkg)
			}
			if !tc.wantViolation && len(bad) > 0 {
				t.Errorf("%s imports %v", tc.pkg, bad)
			}
		})
	}
}

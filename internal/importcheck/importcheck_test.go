package importcheck

import (
	"os"
	"os/exec"
	"slices"
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

// TestBrowserBuildLeavesOutJudging: the dashboard links the domain for its
// validation only; the file that ties experiments to their judging stays out
// of the js build, which keeps the judging out of app.wasm.
func TestBrowserBuildLeavesOutJudging(t *testing.T) {
	files := func(goos, goarch string) string {
		cmd := exec.Command("go", "list", "-f", "{{join .GoFiles \" \"}}", module+"/domain")
		cmd.Dir = "../.."
		cmd.Env = append(os.Environ(), "GOOS="+goos, "GOARCH="+goarch)
		out, err := cmd.Output()
		if err != nil {
			t.Fatalf("go list domain for %s/%s: %v", goos, goarch, err)
		}
		return " " + strings.TrimSpace(string(out)) + " "
	}
	if js := files("js", "wasm"); strings.Contains(js, " judges.go ") || !strings.Contains(js, " judges_js.go ") {
		t.Errorf("js/wasm build of domain has files %s; want judges_js.go and not judges.go", js)
	}
	if host := files("", ""); !strings.Contains(host, " judges.go ") || strings.Contains(host, " judges_js.go ") {
		t.Errorf("host build of domain has files %s; want judges.go and not judges_js.go", host)
	}
}

// TestOnlyStoreImportsBbolt: the bbolt file is the store's alone; every
// other package (tests too) goes through store's API and its errors.
func TestOnlyStoreImportsBbolt(t *testing.T) {
	cmd := exec.Command("go", "list", "-f", `{{.ImportPath}} {{join .Imports " "}} {{join .TestImports " "}} {{join .XTestImports " "}}`, "./...")
	cmd.Dir = "../.."
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("go list: %v", err)
	}
	seen := false
	for _, line := range strings.Split(strings.TrimSpace(string(out)), "\n") {
		f := strings.Fields(line)
		if len(f) == 0 || !slices.Contains(f[1:], "go.etcd.io/bbolt") {
			continue
		}
		if f[0] == module+"/store" {
			seen = true
			continue
		}
		t.Errorf("%s imports go.etcd.io/bbolt; only %s/store may", f[0], module)
	}
	if !seen {
		t.Errorf("the store does not import bbolt: the check looks at the wrong thing")
	}
}

package main

import (
	"bytes"
	"context"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// TestStaffCommand runs fluxroom staff against a running server: the
// administrator adds an instructor, who adds and revokes an assistant;
// refusals and mistakes exit non-zero with the reason.
func TestStaffCommand(t *testing.T) {
	p := startProgram(t, t.TempDir(), filepath.Join(t.TempDir(), "staff.db"), "127.0.0.1:0")
	defer p.stop(t)
	run := func(args ...string) (string, error) {
		var out, errOut bytes.Buffer
		err := NewMain(&out, &errOut).Run(context.Background(), append([]string{"staff"}, args...))
		return out.String() + errOut.String(), err
	}
	keyIn := regexp.MustCompile(`#key=(\S+)`)
	out, err := run("add", "--server", p.addr, "--key", testKey, "--name", "Rosalind Achterberg", "--instructor", "PHY 214", "--assistant", "PHY 118")
	if err != nil || !strings.Contains(out, `instructor of "PHY 214"`) || !keyIn.MatchString(out) {
		t.Fatalf("admin adds an instructor: %v\n%s", err, out)
	}
	rosalind := keyIn.FindStringSubmatch(out)[1]
	out, err = run("add", "--server", p.addr, "--key", rosalind, "--name", "Teo Vasquez-Lind", "--assistant", "PHY 214")
	if err != nil || !keyIn.MatchString(out) {
		t.Fatalf("instructor adds an assistant: %v\n%s", err, out)
	}
	teo := keyIn.FindStringSubmatch(out)[1]
	out, err = run("list", "--server", p.addr, "--key", rosalind)
	if err != nil || !strings.Contains(out, "Teo Vasquez-Lind") || !strings.Contains(out, "Rosalind Achterberg") {
		t.Errorf("instructor lists staff: %v\n%s", err, out)
	}
	if out, err := run("whoami", "--server", p.addr, "--key", teo); err != nil || !strings.Contains(out, `Teo Vasquez-Lind (id 2): assistant of "PHY 214"`) {
		t.Errorf("whoami: %v\n%s", err, out)
	}
	for _, tc := range []struct {
		name string
		args []string
		code int
		says string
	}{
		{"an assistant lists staff", []string{"list", "--server", p.addr, "--key", teo}, 1, "PermissionDenied"},
		{"an instructor adds an instructor", []string{"add", "--server", p.addr, "--key", rosalind, "--name", "X Y", "--instructor", "PHY 214"}, 1, "only the administrator may give"},
		{"an instructor adds to a course they assist", []string{"add", "--server", p.addr, "--key", rosalind, "--name", "X Y", "--assistant", "PHY 118"}, 1, "only its instructors may manage its assistants"},
		{"no name", []string{"add", "--server", p.addr, "--key", testKey, "--assistant", "PHY 214"}, 1, "name"},
		{"no role", []string{"add", "--server", p.addr, "--key", testKey, "--name", "X Y"}, 1, "roles"},
		{"no id", []string{"rotate", "--server", p.addr, "--key", testKey}, 2, "--id is required"},
		{"no key", []string{"list", "--server", p.addr}, 2, "--key is required"},
		{"an unknown subcommand", []string{"promote", "--server", p.addr}, 2, "unknown command"},
	} {
		out, err := run(tc.args...)
		if err != nil {
			out += err.Error()
		}
		if exitCode(err) != tc.code || !strings.Contains(out, tc.says) {
			t.Errorf("%s: exit %d, %q; want exit %d saying %q", tc.name, exitCode(err), out, tc.code, tc.says)
		}
	}
	if out, err := run("add", "--server", p.addr, "--key", testKey, "--name", "Teo Vasquez-Lind", "--assistant", "PHY 118"); err != nil ||
		!strings.Contains(out, `already has an account; it is now assistant of "PHY 118"; assistant of "PHY 214". Their key is unchanged`) || keyIn.MatchString(out) {
		t.Errorf("adding a role to an existing person: %v\n%s", err, out)
	}
	// Teo now assists in a course Rosalind only assists in: only the
	// administrator may revoke him; Rosalind may take him off PHY 214.
	if _, err := run("revoke", "--server", p.addr, "--key", rosalind, "--id", "2"); exitCode(err) != 1 || !strings.Contains(err.Error(), "may not change the account of Teo Vasquez-Lind") {
		t.Errorf("an instructor revokes an assistant of another course too: %v", err)
	}
	if out, err := run("revoke", "--server", p.addr, "--key", rosalind, "--id", "2", "--course", "PHY 214"); err != nil ||
		!strings.Contains(out, `Removed the role of Teo Vasquez-Lind (id 2) in "PHY 214"; they are now assistant of "PHY 118", with the same key`) {
		t.Errorf("removing one role: %v\n%s", err, out)
	}
	if out, err := run("revoke", "--server", p.addr, "--key", testKey, "--id", "2"); err != nil || !strings.Contains(out, "Revoked the key of Teo Vasquez-Lind") {
		t.Errorf("revoke: %v\n%s", err, out)
	}
	if out, err := run("whoami", "--server", p.addr, "--key", teo); exitCode(err) != 1 || !strings.Contains(out+err.Error(), "revoked") {
		t.Errorf("whoami with a revoked key: %v\n%s", err, out)
	}
}

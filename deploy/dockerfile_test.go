package deploy

import (
	"debug/elf"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// instruction is one Dockerfile instruction, continuation lines joined.
type instruction struct {
	cmd  string // upper case: FROM, RUN, …
	args string
}

// parseDockerfile splits a Dockerfile into its instructions.
func parseDockerfile(src string) []instruction {
	var out []instruction
	var cur strings.Builder
	for _, line := range strings.Split(src, "\n") {
		trimmed := strings.TrimSpace(line)
		if cur.Len() == 0 && (trimmed == "" || strings.HasPrefix(trimmed, "#")) {
			continue
		}
		if strings.HasSuffix(trimmed, `\`) {
			cur.WriteString(strings.TrimSuffix(trimmed, `\`) + " ")
			continue
		}
		cur.WriteString(trimmed)
		cmd, args, _ := strings.Cut(cur.String(), " ")
		out = append(out, instruction{cmd: strings.ToUpper(cmd), args: strings.TrimSpace(args)})
		cur.Reset()
	}
	return out
}

// goBuildRE takes the build stage's command from CGO_ENABLED=0 on.
var goBuildRE = regexp.MustCompile(`CGO_ENABLED=0 .*go build .*-o (\S+) \.$`)

// buildAsDockerfile runs the Dockerfile's `go build` line on this machine
// (with VERSION=test and the output in the test's temporary folder) and
// returns the binary. It takes a minute or two on a cold build cache
// (-trimpath compiles everything again); later runs reuse the cache.
func buildAsDockerfile(t *testing.T) string {
	t.Helper()
	var run string
	for _, in := range parseDockerfile(string(readFile(t, "Dockerfile"))) {
		if in.cmd == "RUN" && strings.Contains(in.args, "go build") {
			run = in.args
		}
	}
	m := goBuildRE.FindStringSubmatch(run)
	if m == nil {
		t.Fatalf("no `CGO_ENABLED=0 … go build … -o OUT .` in the Dockerfile's RUN lines: %q", run)
	}
	dir, err := filepath.Abs(root)
	if err != nil {
		t.Fatal(err)
	}
	bin := filepath.Join(t.TempDir(), "kelvard")
	line := strings.Replace(m[0], "-o "+m[1], "-o "+bin, 1)
	line = strings.ReplaceAll(line, "${VERSION}", "test")
	cmd := exec.Command("sh", "-c", line)
	cmd.Dir = dir
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("build as the Dockerfile does: %v\n%s\n%s", err, line, out)
	}
	return bin
}

func TestDockerfile(t *testing.T) {
	t.Parallel()
	ins := parseDockerfile(string(readFile(t, "Dockerfile")))
	var stages [][]instruction
	for _, in := range ins {
		if in.cmd == "FROM" {
			stages = append(stages, nil)
		}
		if len(stages) > 0 {
			stages[len(stages)-1] = append(stages[len(stages)-1], in)
		}
	}
	if len(stages) < 2 {
		t.Fatalf("%d stages, want a build stage and a final one", len(stages))
	}
	if !strings.HasPrefix(stages[0][0].args, "golang:") {
		t.Errorf("build stage from %q, want a golang image", stages[0][0].args)
	}
	final := stages[len(stages)-1]
	if base := final[0].args; !strings.HasPrefix(base, "gcr.io/distroless/static") && base != "scratch" {
		t.Errorf("final stage from %q, want distroless static or scratch", base)
	}
	got := map[string]string{}
	for _, in := range final[1:] {
		got[in.cmd] = in.args
	}
	if u := got["USER"]; !regexp.MustCompile(`^[1-9][0-9]*(:[1-9][0-9]*)?$`).MatchString(u) {
		t.Errorf("USER %q, want a numeric non-root user", u)
	}
	if got["EXPOSE"] != "8080" {
		t.Errorf("EXPOSE %q, want 8080", got["EXPOSE"])
	}
	if e := got["ENTRYPOINT"]; !regexp.MustCompile(`^\["[^"]*kelvard", "serve"\]$`).MatchString(e) {
		t.Errorf("ENTRYPOINT %s, want the binary with serve in exec form", e)
	}
	if !strings.HasPrefix(got["COPY"], "--from=build ") {
		t.Errorf("final stage COPY %q, want the binary from the build stage", got["COPY"])
	}

	if testing.Short() {
		t.Skip("-short: the Dockerfile's build command is not run")
	}
	bin := buildAsDockerfile(t)
	f, err := elf.Open(bin)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	for _, p := range f.Progs {
		if p.Type == elf.PT_INTERP {
			t.Error("the binary names a dynamic loader: not static")
		}
	}
	if libs, err := f.ImportedLibraries(); err != nil || len(libs) > 0 {
		t.Errorf("the binary needs shared libraries %v (%v)", libs, err)
	}
	out, err := exec.Command(bin, "version").CombinedOutput()
	if err != nil || strings.TrimSpace(string(out)) != "kelvard test" {
		t.Errorf("kelvard version: %q %v, want the version from -ldflags", out, err)
	}
}

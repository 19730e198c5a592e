package deploy

import (
	"bufio"
	"bytes"
	"debug/elf"
	"encoding/json"
	"errors"
	"fmt"
	"go/ast"
	"go/parser"
	"go/token"
	"os"
	"os/exec"
	"path"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
)

// Ports the server listens on by default (cmd/fugad flags --grpc-addr and
// --metrics-addr); the image, manifests and scrape job must agree on them.
const (
	grpcPort    = 50051
	metricsPort = 9464
)

// dockerInstruction is one instruction of a Dockerfile after line
// continuations are joined: the keyword in upper case, its leading --flags
// and the rest of the line.
type dockerInstruction struct {
	Cmd   string
	Flags []string
	Args  string
	Line  int
}

// dockerStage is the instructions from one FROM to the next.
type dockerStage struct {
	From   dockerInstruction
	Base   string
	Name   string
	Instrs []dockerInstruction
}

// dockerfile is a parsed Dockerfile: the ARGs before the first FROM and the
// stages.
type dockerfile struct {
	GlobalArgs []dockerInstruction
	Stages     []dockerStage
}

// parseDockerfile parses the subset of the Dockerfile syntax
// (https://docs.docker.com/reference/dockerfile/) that fugad uses: comments,
// parser directives, backslash line continuations and one instruction per
// logical line. Heredocs and a changed escape character are rejected rather
// than misread.
func parseDockerfile(src string) (*dockerfile, error) {
	var (
		df      dockerfile
		logical strings.Builder
		start   int
	)
	flush := func() error {
		text := strings.TrimSpace(logical.String())
		logical.Reset()
		if text == "" {
			return nil
		}
		ins, err := splitInstruction(text, start)
		if err != nil {
			return err
		}
		switch {
		case ins.Cmd == "FROM":
			st := dockerStage{From: ins}
			f := strings.Fields(ins.Args)
			switch {
			case len(f) == 1:
				st.Base = f[0]
			case len(f) == 3 && strings.EqualFold(f[1], "AS"):
				st.Base, st.Name = f[0], f[2]
			default:
				return fmt.Errorf("line %d: cannot read FROM %q", ins.Line, ins.Args)
			}
			df.Stages = append(df.Stages, st)
		case len(df.Stages) == 0:
			if ins.Cmd != "ARG" {
				return fmt.Errorf("line %d: %s before the first FROM", ins.Line, ins.Cmd)
			}
			df.GlobalArgs = append(df.GlobalArgs, ins)
		default:
			st := &df.Stages[len(df.Stages)-1]
			st.Instrs = append(st.Instrs, ins)
		}
		return nil
	}
	sc := bufio.NewScanner(strings.NewReader(src))
	lineNo := 0
	continued := false
	for sc.Scan() {
		lineNo++
		line := sc.Text()
		trimmed := strings.TrimSpace(line)
		if strings.HasPrefix(trimmed, "#") {
			if d, ok := strings.CutPrefix(strings.ReplaceAll(trimmed, " ", ""), "#escape="); ok && d != `\` {
				return nil, fmt.Errorf("line %d: escape directive %q is not supported", lineNo, d)
			}
			continue // comments, directives and comment lines inside a continuation
		}
		if !continued {
			if trimmed == "" {
				continue
			}
			start = lineNo
		}
		if body, ok := strings.CutSuffix(strings.TrimRight(line, " \t"), `\`); ok {
			logical.WriteString(body)
			logical.WriteString(" ")
			continued = true
			continue
		}
		logical.WriteString(line)
		continued = false
		if err := flush(); err != nil {
			return nil, err
		}
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	if continued {
		return nil, errors.New("file ends inside a line continuation")
	}
	if len(df.Stages) == 0 {
		return nil, errors.New("no FROM instruction")
	}
	return &df, nil
}

func splitInstruction(text string, line int) (dockerInstruction, error) {
	kw, rest, _ := strings.Cut(text, " ")
	ins := dockerInstruction{Cmd: strings.ToUpper(kw), Line: line}
	rest = strings.TrimSpace(rest)
	if strings.Contains(rest, "<<") && (ins.Cmd == "RUN" || ins.Cmd == "COPY") {
		return ins, fmt.Errorf("line %d: heredocs are not supported", line)
	}
	if ins.Cmd == "FROM" || ins.Cmd == "RUN" || ins.Cmd == "COPY" || ins.Cmd == "ADD" {
		for strings.HasPrefix(rest, "--") {
			flag, after, _ := strings.Cut(rest, " ")
			ins.Flags = append(ins.Flags, flag)
			rest = strings.TrimSpace(after)
		}
	}
	ins.Args = rest
	return ins, nil
}

// flag returns the value of a --name=value flag of the instruction.
func (ins dockerInstruction) flag(name string) (string, bool) {
	for _, f := range ins.Flags {
		if v, ok := strings.CutPrefix(f, "--"+name+"="); ok {
			return v, true
		}
	}
	return "", false
}

// execForm decodes an exec-form (JSON array) argument list.
func (ins dockerInstruction) execForm() ([]string, error) {
	var argv []string
	if !strings.HasPrefix(ins.Args, "[") {
		return nil, fmt.Errorf("line %d: %s %s is in shell form, not exec form", ins.Line, ins.Cmd, ins.Args)
	}
	if err := json.Unmarshal([]byte(ins.Args), &argv); err != nil {
		return nil, fmt.Errorf("line %d: %s: %v", ins.Line, ins.Cmd, err)
	}
	if len(argv) == 0 {
		return nil, fmt.Errorf("line %d: empty %s", ins.Line, ins.Cmd)
	}
	return argv, nil
}

func (st dockerStage) all(cmd string) []dockerInstruction {
	var out []dockerInstruction
	for _, ins := range st.Instrs {
		if ins.Cmd == cmd {
			out = append(out, ins)
		}
	}
	return out
}

// args returns the build arguments visible in the stage with their default
// values: an ARG inside the stage takes the default given there or, without
// one, the default of the global ARG of the same name.
func (df *dockerfile) args(st dockerStage) map[string]string {
	global := map[string]string{}
	for _, ins := range df.GlobalArgs {
		for _, a := range strings.Fields(ins.Args) {
			k, v, _ := strings.Cut(a, "=")
			global[k] = strings.Trim(v, `"`)
		}
	}
	vars := map[string]string{}
	for _, ins := range st.Instrs {
		if ins.Cmd != "ARG" && ins.Cmd != "ENV" {
			continue
		}
		for _, a := range strings.Fields(ins.Args) {
			k, v, hasDefault := strings.Cut(a, "=")
			if !hasDefault {
				v = global[k]
			}
			vars[k] = strings.Trim(v, `"`)
		}
	}
	return vars
}

// shellCommands splits a POSIX shell command line into simple commands at
// the operators ;, &&, || and |, each a list of words after quote removal
// and expansion of $NAME and ${NAME} from vars. A variable that vars does
// not define is an error, so a misspelt build argument is caught.
func shellCommands(line string, vars map[string]string) ([][]string, error) {
	var (
		cmds    [][]string
		words   []string
		word    strings.Builder
		inWord  bool
		endWord = func() {
			if inWord {
				words = append(words, word.String())
			}
			word.Reset()
			inWord = false
		}
		endCmd = func() {
			endWord()
			if len(words) > 0 {
				cmds = append(cmds, words)
			}
			words = nil
		}
	)
	expand := func(s string, i int) (int, error) {
		j := i + 1
		var name string
		if j < len(s) && s[j] == '{' {
			end := strings.IndexByte(s[j:], '}')
			if end < 0 {
				return 0, fmt.Errorf("unterminated ${ in %q", s)
			}
			name = s[j+1 : j+end]
			j += end + 1
		} else {
			k := j
			for k < len(s) && (s[k] == '_' || s[k] >= 'A' && s[k] <= 'Z' || s[k] >= 'a' && s[k] <= 'z' || k > j && s[k] >= '0' && s[k] <= '9') {
				k++
			}
			name = s[j:k]
			j = k
		}
		if name == "" || strings.ContainsAny(name, ":-+?#%/") {
			return 0, fmt.Errorf("unsupported expansion at %q", s[i:])
		}
		v, ok := vars[name]
		if !ok {
			return 0, fmt.Errorf("variable %s is not declared by ARG or ENV", name)
		}
		word.WriteString(v)
		inWord = true
		return j, nil
	}
	for i := 0; i < len(line); {
		c := line[i]
		switch {
		case c == ' ' || c == '\t' || c == '\n':
			endWord()
			i++
		case c == ';':
			endCmd()
			i++
		case c == '&' || c == '|':
			if i+1 < len(line) && line[i+1] == c {
				i++
			} else if c == '&' {
				return nil, errors.New("background jobs (&) are not supported")
			}
			endCmd()
			i++
		case c == '\'':
			end := strings.IndexByte(line[i+1:], '\'')
			if end < 0 {
				return nil, errors.New("unterminated single quote")
			}
			word.WriteString(line[i+1 : i+1+end])
			inWord = true
			i += end + 2
		case c == '"':
			inWord = true
			i++
			for {
				if i >= len(line) {
					return nil, errors.New("unterminated double quote")
				}
				d := line[i]
				if d == '"' {
					i++
					break
				}
				switch {
				case d == '\\' && i+1 < len(line) && strings.IndexByte("$`\"\\", line[i+1]) >= 0:
					word.WriteByte(line[i+1])
					i += 2
				case d == '$':
					j, err := expand(line, i)
					if err != nil {
						return nil, err
					}
					i = j
				case d == '`':
					return nil, errors.New("command substitution is not supported")
				default:
					word.WriteByte(d)
					i++
				}
			}
		case c == '\\':
			if i+1 < len(line) {
				word.WriteByte(line[i+1])
				inWord = true
			}
			i += 2
		case c == '$':
			if i+1 < len(line) && line[i+1] == '(' {
				return nil, errors.New("command substitution is not supported")
			}
			j, err := expand(line, i)
			if err != nil {
				return nil, err
			}
			i = j
		case c == '`' || c == '<' || c == '>' || c == '(' || c == ')':
			return nil, fmt.Errorf("shell syntax %q is not supported", c)
		default:
			word.WriteByte(c)
			inWord = true
			i++
		}
	}
	endCmd()
	return cmds, nil
}

// goBuild is the go build command of the builder stage: its environment
// assignments, the arguments after "go", and the output path given by -o.
type goBuild struct {
	Env    map[string]string
	Args   []string
	Output string
	Stage  dockerStage
}

func (df *dockerfile) goBuild() (*goBuild, error) {
	var found []*goBuild
	for _, st := range df.Stages {
		vars := df.args(st)
		for _, ins := range st.all("RUN") {
			cmds, err := shellCommands(ins.Args, vars)
			if err != nil {
				return nil, fmt.Errorf("line %d: %v", ins.Line, err)
			}
			for _, words := range cmds {
				env := map[string]string{}
				for _, envIns := range st.all("ENV") {
					for _, a := range strings.Fields(envIns.Args) {
						k, v, _ := strings.Cut(a, "=")
						env[k] = strings.Trim(v, `"`)
					}
				}
				for len(words) > 0 && strings.Contains(words[0], "=") && !strings.HasPrefix(words[0], "-") {
					k, v, _ := strings.Cut(words[0], "=")
					env[k] = v
					words = words[1:]
				}
				if len(words) < 2 || words[0] != "go" || words[1] != "build" {
					continue
				}
				gb := &goBuild{Env: env, Args: words[1:], Stage: st}
				for i, w := range gb.Args {
					if w == "-o" && i+1 < len(gb.Args) {
						gb.Output = gb.Args[i+1]
					} else if o, ok := strings.CutPrefix(w, "-o="); ok {
						gb.Output = o
					}
				}
				found = append(found, gb)
			}
		}
	}
	if len(found) != 1 {
		return nil, fmt.Errorf("want exactly one go build command in the Dockerfile, found %d", len(found))
	}
	return found[0], nil
}

// ldflags returns the words of the -ldflags argument.
func (gb *goBuild) ldflags() []string {
	for i, a := range gb.Args {
		if v, ok := strings.CutPrefix(a, "-ldflags="); ok {
			return strings.Fields(v)
		}
		if a == "-ldflags" && i+1 < len(gb.Args) {
			return strings.Fields(gb.Args[i+1])
		}
	}
	return nil
}

func repoRoot(t testing.TB) string {
	t.Helper()
	root, err := filepath.Abs("..")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(root, "go.mod")); err != nil {
		t.Fatalf("module root not found above deploy/: %v", err)
	}
	return root
}

func loadDockerfile(t testing.TB) *dockerfile {
	t.Helper()
	src, err := os.ReadFile(filepath.Join(repoRoot(t), "Dockerfile"))
	if err != nil {
		t.Fatal(err)
	}
	df, err := parseDockerfile(string(src))
	if err != nil {
		t.Fatalf("Dockerfile: %v", err)
	}
	return df
}

// imageUser returns the numeric UID and GID of the final stage's USER.
func imageUser(t testing.TB, df *dockerfile) (uid, gid int64) {
	t.Helper()
	final := df.Stages[len(df.Stages)-1]
	users := final.all("USER")
	if len(users) == 0 {
		t.Fatal("final stage has no USER: the image would run as root")
	}
	u, g, hasGroup := strings.Cut(users[len(users)-1].Args, ":")
	uid, err := strconv.ParseInt(u, 10, 64)
	if err != nil {
		t.Fatalf("USER %q: the user must be numeric so that runAsNonRoot can verify it", users[len(users)-1].Args)
	}
	gid = uid
	if hasGroup {
		if gid, err = strconv.ParseInt(g, 10, 64); err != nil {
			t.Fatalf("USER %q: the group must be numeric", users[len(users)-1].Args)
		}
	}
	return uid, gid
}

// exposedPorts returns the final stage's EXPOSE ports as "port/proto".
func exposedPorts(df *dockerfile) []string {
	var ports []string
	for _, ins := range df.Stages[len(df.Stages)-1].all("EXPOSE") {
		for _, p := range strings.Fields(ins.Args) {
			if !strings.Contains(p, "/") {
				p += "/tcp"
			}
			ports = append(ports, strings.ToLower(p))
		}
	}
	slices.Sort(ports)
	return ports
}

func TestParseDockerfileRejectsWhatItCannotRead(t *testing.T) {
	for _, src := range []string{
		"RUN echo before any stage\n",
		"FROM a AS\n",
		"FROM a\nRUN <<EOF\necho\nEOF\n",
		"# escape=`\nFROM a\n",
		"FROM a\nRUN echo \\\n",
	} {
		if _, err := parseDockerfile(src); err == nil {
			t.Errorf("parseDockerfile(%q) accepted input it cannot read correctly", src)
		}
	}
	df, err := parseDockerfile("ARG V=1\nFROM --platform=$BUILDPLATFORM a:1 AS b\n# c\nRUN x \\\n  # inner comment\n  y\nFROM s\nUSER 7\n")
	if err != nil {
		t.Fatal(err)
	}
	if len(df.Stages) != 2 || df.Stages[0].Name != "b" || df.Stages[0].Base != "a:1" ||
		df.Stages[0].Instrs[0].Args != "x    y" || df.Stages[1].Instrs[0].Args != "7" {
		t.Errorf("parsed %+v", df)
	}
}

func TestShellCommands(t *testing.T) {
	vars := map[string]string{"VERSION": "1.2.3", "EMPTY": ""}
	cmds, err := shellCommands(`A=0 go build -ldflags "-s -X main.version=${VERSION}" -o '/o $x' ./c && echo $VERSION$EMPTY;true`, vars)
	if err != nil {
		t.Fatal(err)
	}
	want := [][]string{
		{"A=0", "go", "build", "-ldflags", "-s -X main.version=1.2.3", "-o", "/o $x", "./c"},
		{"echo", "1.2.3"},
		{"true"},
	}
	if fmt.Sprint(cmds) != fmt.Sprint(want) {
		t.Errorf("got %q, want %q", cmds, want)
	}
	for _, bad := range []string{`echo $UNDECLARED`, `echo "open`, "echo `date`", `echo $(date)`, `echo ${VERSION:-x}`} {
		if _, err := shellCommands(bad, vars); err == nil {
			t.Errorf("shellCommands(%q) succeeded", bad)
		}
	}
}

func TestDockerfileStages(t *testing.T) {
	df := loadDockerfile(t)
	if len(df.Stages) < 2 {
		t.Fatalf("want a multi-stage build, got %d stage(s)", len(df.Stages))
	}
	final := df.Stages[len(df.Stages)-1]
	if runs := final.all("RUN"); len(runs) > 0 {
		t.Errorf("final stage line %d: RUN needs a shell; the runtime image must not need one", runs[0].Line)
	}
	if !strings.Contains(final.Base, "distroless/static") && final.Base != "scratch" {
		t.Errorf("final stage FROM %s: want a shell-less static base (distroless/static or scratch)", final.Base)
	}
	gb, err := df.goBuild()
	if err != nil {
		t.Fatal(err)
	}
	if gb.Stage.Name == "" || gb.Stage.Base == final.Base {
		t.Errorf("go build runs in stage %q FROM %s, want a named builder stage", gb.Stage.Name, gb.Stage.Base)
	}
	if !strings.HasPrefix(gb.Stage.Base, "golang:") {
		t.Errorf("builder stage FROM %s, want a golang image", gb.Stage.Base)
	}
	// The binary the final stage copies is the one go build wrote.
	var copied, dest string
	for _, ins := range final.all("COPY") {
		if from, ok := ins.flag("from"); ok && from == gb.Stage.Name {
			f := strings.Fields(ins.Args)
			copied, dest = f[0], f[len(f)-1]
		}
	}
	if copied != gb.Output {
		t.Errorf("final stage copies %q from %s, but go build writes %q", copied, gb.Stage.Name, gb.Output)
	}
	eps := final.all("ENTRYPOINT")
	if len(eps) != 1 {
		t.Fatalf("final stage has %d ENTRYPOINT instructions, want 1", len(eps))
	}
	argv, err := eps[0].execForm()
	if err != nil {
		t.Fatal(err)
	}
	if argv[0] != dest {
		t.Errorf("ENTRYPOINT runs %q, but the binary is copied to %q", argv[0], dest)
	}
	for _, cmd := range final.all("CMD") {
		if _, err := cmd.execForm(); err != nil {
			t.Error(err)
		}
	}
}

func TestDockerfileRunsAsNonRoot(t *testing.T) {
	uid, gid := imageUser(t, loadDockerfile(t))
	if uid == 0 || gid == 0 {
		t.Errorf("USER %d:%d: want a non-root user and group", uid, gid)
	}
}

func TestDockerfileExposesServerPorts(t *testing.T) {
	got := exposedPorts(loadDockerfile(t))
	want := []string{fmt.Sprintf("%d/tcp", grpcPort), fmt.Sprintf("%d/tcp", metricsPort)}
	slices.Sort(want)
	if !slices.Equal(got, want) {
		t.Errorf("EXPOSE %v, want %v", got, want)
	}
}

func TestDockerfileBuildIsStatic(t *testing.T) {
	df := loadDockerfile(t)
	gb, err := df.goBuild()
	if err != nil {
		t.Fatal(err)
	}
	if gb.Env["CGO_ENABLED"] != "0" {
		t.Errorf("go build runs with CGO_ENABLED=%q, want 0 for a static binary", gb.Env["CGO_ENABLED"])
	}
	if !slices.Contains(gb.Args, "-trimpath") {
		t.Errorf("go build %q lacks -trimpath", gb.Args)
	}
	ld := gb.ldflags()
	for _, want := range []string{"-s", "-w"} {
		if !slices.Contains(ld, want) {
			t.Errorf("-ldflags %q lacks %s", ld, want)
		}
	}
	vars := df.args(gb.Stage)
	if v, ok := vars["VERSION"]; !ok || !slices.Contains(ld, "main.version="+v) {
		t.Errorf("-ldflags %q must set main.version from ARG VERSION (default %q)", ld, v)
	}
	if gb.Output == "" || !path.IsAbs(gb.Output) {
		t.Errorf("go build output %q: want an absolute -o path", gb.Output)
	}
	if pkg := gb.Args[len(gb.Args)-1]; pkg != "./cmd/fugad" {
		t.Errorf("go build builds %q, want ./cmd/fugad", pkg)
	}
}

// builtServer is the binary produced by running the Dockerfile's go build
// command on this machine, shared by the tests that need it.
var builtServer struct {
	once sync.Once
	path string
	err  error
	dir  string
}

func TestMain(m *testing.M) {
	dir, err := os.MkdirTemp("", "fugad-deploy-test-")
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	builtServer.dir = dir
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

// buildServer runs the builder stage's go build command from the module
// root (the stage copies the build context to its WORKDIR), writing to a
// temporary directory instead of the image path. Platform variables the
// builder leaves empty fall back to this machine's platform, as go build
// does in the builder image.
func buildServer(t testing.TB) string {
	t.Helper()
	root := repoRoot(t)
	builtServer.once.Do(func() {
		df, err := parseDockerfileFile(root)
		if err != nil {
			builtServer.err = err
			return
		}
		gb, err := df.goBuild()
		if err != nil {
			builtServer.err = err
			return
		}
		out := filepath.Join(builtServer.dir, "fugad")
		args := slices.Clone(gb.Args)
		for i := range args {
			if args[i] == "-o" && i+1 < len(args) {
				args[i+1] = out
			}
		}
		cmd := exec.Command("go", args...)
		cmd.Dir = root
		cmd.Env = os.Environ()
		for k, v := range gb.Env {
			cmd.Env = append(cmd.Env, k+"="+v)
		}
		if b, err := cmd.CombinedOutput(); err != nil {
			builtServer.err = fmt.Errorf("the Dockerfile's build command failed: %s %q: %v\n%s", "go", args, err, b)
			return
		}
		builtServer.path = out
	})
	if builtServer.err != nil {
		t.Fatal(builtServer.err)
	}
	return builtServer.path
}

func parseDockerfileFile(root string) (*dockerfile, error) {
	src, err := os.ReadFile(filepath.Join(root, "Dockerfile"))
	if err != nil {
		return nil, err
	}
	return parseDockerfile(string(src))
}

func TestDockerfileBuildCommandBuilds(t *testing.T) {
	bin := buildServer(t)
	f, err := elf.Open(bin)
	if err != nil {
		t.Fatalf("built file is not an ELF executable: %v", err)
	}
	defer f.Close()
	for _, p := range f.Progs {
		if p.Type == elf.PT_INTERP {
			t.Error("binary requests a dynamic loader (PT_INTERP): it will not run on distroless/static")
		}
	}
	if libs, _ := f.ImportedLibraries(); len(libs) > 0 {
		t.Errorf("binary links shared libraries %v", libs)
	}
	if f.Section(".debug_info") != nil {
		t.Error("binary keeps DWARF debug information despite -ldflags -w")
	}
	out, err := exec.Command("go", "version", "-m", bin).CombinedOutput()
	if err != nil {
		t.Fatalf("go version -m: %v\n%s", err, out)
	}
	for _, want := range []string{"build\tCGO_ENABLED=0", "build\t-trimpath=true"} {
		if !bytes.Contains(out, []byte(want)) {
			t.Errorf("build settings lack %q:\n%s", want, out)
		}
	}
}

// TestServerDeclaresVersionVariable checks that -X main.version has a
// target: the linker silently ignores -X for a variable that does not exist.
func TestServerDeclaresVersionVariable(t *testing.T) {
	dir := filepath.Join(repoRoot(t), "cmd", "fugad")
	fset := token.NewFileSet()
	files, err := filepath.Glob(filepath.Join(dir, "*.go"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no Go files in %s (%v)", dir, err)
	}
	for _, name := range files {
		if strings.HasSuffix(name, "_test.go") {
			continue
		}
		f, err := parser.ParseFile(fset, name, nil, parser.SkipObjectResolution)
		if err != nil {
			t.Fatal(err)
		}
		if f.Name.Name != "main" {
			continue
		}
		for _, decl := range f.Decls {
			gd, ok := decl.(*ast.GenDecl)
			if !ok || gd.Tok != token.VAR {
				continue
			}
			for _, spec := range gd.Specs {
				vs := spec.(*ast.ValueSpec)
				for i, n := range vs.Names {
					if n.Name != "version" {
						continue
					}
					if id, ok := vs.Type.(*ast.Ident); ok && id.Name == "string" {
						return
					}
					if vs.Type == nil && i < len(vs.Values) {
						if lit, ok := vs.Values[i].(*ast.BasicLit); ok && lit.Kind == token.STRING {
							return
						}
					}
					t.Fatalf("%s: main.version must be a string variable set by a constant, for -X", fset.Position(n.Pos()))
				}
			}
		}
	}
	t.Fatalf("package main in %s declares no package-level `var version string`; -X main.version=... would do nothing", dir)
}

// dockerignore is the list of patterns in .dockerignore, matched as the
// Docker builder does: a path is excluded when it or one of its parent
// directories matches a pattern, patterns use filepath.Match syntax plus
// "**" for any number of directories, and a later "!" pattern re-includes.
type dockerignore []string

func (d dockerignore) excludes(p string) bool {
	excluded := false
	for _, pat := range d {
		negate := strings.HasPrefix(pat, "!")
		pat = strings.TrimPrefix(pat, "!")
		if ignoreMatch(pat, p) {
			excluded = !negate
		}
	}
	return excluded
}

func ignoreMatch(pattern, p string) bool {
	pattern = strings.TrimPrefix(path.Clean(pattern), "/")
	parts := strings.Split(p, "/")
	for n := 1; n <= len(parts); n++ {
		if globMatch(strings.Split(pattern, "/"), parts[:n]) {
			return true
		}
	}
	return false
}

func globMatch(pat, name []string) bool {
	if len(pat) == 0 {
		return len(name) == 0
	}
	if pat[0] == "**" {
		for i := 0; i <= len(name); i++ {
			if globMatch(pat[1:], name[i:]) {
				return true
			}
		}
		return false
	}
	if len(name) == 0 {
		return false
	}
	ok, err := path.Match(pat[0], name[0])
	return err == nil && ok && globMatch(pat[1:], name[1:])
}

func loadDockerignore(t testing.TB) dockerignore {
	t.Helper()
	src, err := os.ReadFile(filepath.Join(repoRoot(t), ".dockerignore"))
	if err != nil {
		t.Fatal(err)
	}
	var d dockerignore
	for _, line := range strings.Split(string(src), "\n") {
		line = strings.TrimSpace(line)
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		if _, err := path.Match(strings.TrimPrefix(line, "!"), ""); err != nil {
			t.Fatalf(".dockerignore: bad pattern %q: %v", line, err)
		}
		d = append(d, line)
	}
	return d
}

func TestDockerignoreMatch(t *testing.T) {
	d := dockerignore{".git", "**/*_test.go", "docs/*.md", "!docs/keep.md", "/build/*"}
	for p, want := range map[string]bool{
		".git":                 true,
		".git/config":          true,
		"a_test.go":            true,
		"thermo/eos/a_test.go": true,
		"thermo/eos/a.go":      false,
		"docs/x.md":            true,
		"docs/keep.md":         false,
		"docs/sub/x.md":        false, // * does not cross a slash
		"build/sub/x":          true,  // its parent build/sub matches build/*
		"build":                false,
		"git":                  false,
	} {
		if got := d.excludes(p); got != want {
			t.Errorf("excludes(%q) = %v, want %v", p, got, want)
		}
	}
}

// TestDockerignoreKeepsBuildInputs checks that every file go build reads
// for ./cmd/fugad from this module (sources, embedded files, go.mod and
// go.sum) is in the build context.
func TestDockerignoreKeepsBuildInputs(t *testing.T) {
	root := repoRoot(t)
	ignore := loadDockerignore(t)
	for _, must := range []string{".git/HEAD", "deploy/kubernetes/deployment.yaml"} {
		if !ignore.excludes(must) {
			t.Errorf(".dockerignore keeps %s, which the image does not need", must)
		}
	}
	cmd := exec.Command("go", "list", "-deps", "-json=Dir,Module,GoFiles,EmbedFiles,CgoFiles,SFiles,HFiles,SysoFiles", "./cmd/fugad")
	cmd.Dir = root
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("go list ./cmd/fugad: %v\n%s", err, stderr.Bytes())
	}
	inputs := []string{"go.mod", "go.sum"}
	dec := json.NewDecoder(bytes.NewReader(out))
	for dec.More() {
		var p struct {
			Dir                                                      string
			Module                                                   *struct{ Path string }
			GoFiles, EmbedFiles, CgoFiles, SFiles, HFiles, SysoFiles []string
		}
		if err := dec.Decode(&p); err != nil {
			t.Fatal(err)
		}
		if p.Module == nil || p.Module.Path != "github.com/fugad/fugad" {
			continue
		}
		rel, err := filepath.Rel(root, p.Dir)
		if err != nil {
			t.Fatal(err)
		}
		for _, list := range [][]string{p.GoFiles, p.EmbedFiles, p.CgoFiles, p.SFiles, p.HFiles, p.SysoFiles} {
			for _, f := range list {
				inputs = append(inputs, filepath.ToSlash(filepath.Join(rel, f)))
			}
		}
	}
	if len(inputs) < 3 {
		t.Fatal("go list found no source files of this module for ./cmd/fugad")
	}
	for _, f := range inputs {
		if ignore.excludes(f) {
			t.Errorf(".dockerignore excludes %s, which go build ./cmd/fugad needs", f)
		}
	}
}

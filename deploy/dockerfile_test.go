package deploy

import (
	"bufio"
	"fmt"
	"io"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"

	"github.com/moby/patternmatcher"
	"github.com/moby/patternmatcher/ignorefile"
)

// A minimal reader of deploy/Dockerfile: enough of the Dockerfile syntax
// (instructions, line continuations, comments, stages, ARG and ENV) to check
// the image's definition and to run its go build command outside a container
// engine. It rejects what it does not understand rather than guessing.

// dfInstr is one Dockerfile instruction.
type dfInstr struct {
	Cmd  string // upper case: FROM, RUN, ...
	Args string // the rest, continuations joined with spaces
	Line int    // first line, 1-based
}

// dfStage is one build stage.
type dfStage struct {
	Base, Name, Platform string
	Instrs               []dfInstr
}

// dockerfile is a parsed Dockerfile.
type dockerfile struct {
	GlobalArgs map[string]string // ARGs before the first FROM, with defaults
	Stages     []dfStage
}

var knownInstr = map[string]bool{"FROM": true, "ARG": true, "ENV": true, "WORKDIR": true, "COPY": true, "RUN": true,
	"EXPOSE": true, "USER": true, "ENTRYPOINT": true, "CMD": true, "LABEL": true}

// parseDockerfile reads the Dockerfile at path.
func parseDockerfile(path string) (*dockerfile, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return readDockerfile(f, path)
}

func readDockerfile(r io.Reader, name string) (*dockerfile, error) {
	var instrs []dfInstr
	sc := bufio.NewScanner(r)
	n := 0
	var cur *dfInstr
	for sc.Scan() {
		n++
		line := strings.TrimSpace(sc.Text())
		if strings.HasPrefix(line, "#") || (line == "" && cur == nil) {
			continue // comments (also inside continuations, as Docker does) and blank lines
		}
		cont := strings.HasSuffix(line, "\\")
		line = strings.TrimSpace(strings.TrimSuffix(line, "\\"))
		if cur == nil {
			cmd, rest, _ := strings.Cut(line, " ")
			cmd = strings.ToUpper(cmd)
			if !knownInstr[cmd] {
				return nil, fmt.Errorf("%s:%d: instruction %q not understood by this reader", name, n, cmd)
			}
			cur = &dfInstr{Cmd: cmd, Args: strings.TrimSpace(rest), Line: n}
		} else if line != "" {
			cur.Args += " " + line
		}
		if !cont {
			instrs = append(instrs, *cur)
			cur = nil
		}
	}
	if err := sc.Err(); err != nil {
		return nil, err
	}
	if cur != nil {
		return nil, fmt.Errorf("%s:%d: file ends inside a continued line", name, cur.Line)
	}
	d := &dockerfile{GlobalArgs: map[string]string{}}
	fromRe := regexp.MustCompile(`^(?:--platform=(\S+)\s+)?(\S+)(?:\s+(?i:AS)\s+(\S+))?$`)
	for _, in := range instrs {
		if in.Cmd == "FROM" {
			m := fromRe.FindStringSubmatch(in.Args)
			if m == nil {
				return nil, fmt.Errorf("%s:%d: FROM %q not understood", name, in.Line, in.Args)
			}
			d.Stages = append(d.Stages, dfStage{Platform: m[1], Base: m[2], Name: m[3]})
			continue
		}
		if len(d.Stages) == 0 {
			if in.Cmd != "ARG" {
				return nil, fmt.Errorf("%s:%d: %s before the first FROM", name, in.Line, in.Cmd)
			}
			k, v, _ := strings.Cut(in.Args, "=")
			d.GlobalArgs[k] = v
			continue
		}
		s := &d.Stages[len(d.Stages)-1]
		s.Instrs = append(s.Instrs, in)
	}
	if len(d.Stages) == 0 {
		return nil, fmt.Errorf("%s: no FROM", name)
	}
	return d, nil
}

// stage returns the stage called name, or nil.
func (d *dockerfile) stage(name string) *dfStage {
	for i := range d.Stages {
		if d.Stages[i].Name == name {
			return &d.Stages[i]
		}
	}
	return nil
}

// final is the last stage: the image.
func (d *dockerfile) final() *dfStage { return &d.Stages[len(d.Stages)-1] }

// all returns the stage's instructions of kind cmd.
func (s *dfStage) all(cmd string) []dfInstr {
	var out []dfInstr
	for _, in := range s.Instrs {
		if in.Cmd == cmd {
			out = append(out, in)
		}
	}
	return out
}

// argDefaults returns the stage's ARG defaults (global ones it redeclares
// keep the global default unless given one).
func (d *dockerfile) argDefaults(s *dfStage) map[string]string {
	out := map[string]string{}
	for _, in := range s.all("ARG") {
		k, v, ok := strings.Cut(in.Args, "=")
		if !ok {
			v = d.GlobalArgs[k]
		}
		out[k] = v
	}
	return out
}

// envPairs splits an ENV instruction's "K=V K2=V2" into pairs. Quoted
// values are not supported (and not used).
func envPairs(in dfInstr) ([][2]string, error) {
	var out [][2]string
	for _, f := range strings.Fields(in.Args) {
		k, v, ok := strings.Cut(f, "=")
		if !ok || strings.ContainsAny(v, `"'`) {
			return nil, fmt.Errorf("line %d: ENV %q: only unquoted K=V pairs are understood", in.Line, in.Args)
		}
		out = append(out, [2]string{k, v})
	}
	return out, nil
}

// stageEnv returns the environment that the stage's ENV instructions set,
// ${VAR} expanded from vars (ARG values) and earlier ENV values.
func stageEnv(s *dfStage, vars map[string]string) (map[string]string, error) {
	env := map[string]string{}
	lookup := func(k string) string {
		if v, ok := env[k]; ok {
			return v
		}
		return vars[k]
	}
	for _, in := range s.all("ENV") {
		pairs, err := envPairs(in)
		if err != nil {
			return nil, err
		}
		for _, p := range pairs {
			env[p[0]] = os.Expand(p[1], lookup)
		}
	}
	return env, nil
}

// goBuildRun returns the build stage's RUN instruction that runs go build,
// with its --mount options removed.
func goBuildRun(s *dfStage) (string, error) {
	var found []string
	for _, in := range s.all("RUN") {
		cmd := in.Args
		for strings.HasPrefix(cmd, "--") {
			_, rest, _ := strings.Cut(cmd, " ")
			cmd = strings.TrimSpace(rest)
		}
		if strings.HasPrefix(cmd, "go build ") {
			found = append(found, cmd)
		}
	}
	if len(found) != 1 {
		return "", fmt.Errorf("want exactly one RUN go build in stage %q, found %d", s.Name, len(found))
	}
	return found[0], nil
}

// dockerOut is where the Dockerfile's go build writes the binary.
const dockerOut = "/out/kinchain"

// buildWithDockerfile runs deploy/Dockerfile's go build command outside a
// container engine: the build context (the repository, less what
// deploy/Dockerfile.dockerignore excludes) is copied to a directory of its
// own, and the RUN line is executed there by sh with the stage's ENV and
// ARG values as the engine would set them (VERSION and COMMIT set to the
// test's values, TARGETOS/TARGETARCH to this machine's) and the machine's
// Go toolchain. The binary goes to outDir/kinchain instead of /out.
func buildWithDockerfile(root, outDir string) (string, error) {
	d, err := parseDockerfile(filepath.Join(root, "deploy", "Dockerfile"))
	if err != nil {
		return "", err
	}
	s := d.stage("build")
	if s == nil {
		return "", fmt.Errorf("deploy/Dockerfile has no stage named build")
	}
	vars := d.argDefaults(s)
	for k, v := range map[string]string{"VERSION": testVersion, "COMMIT": testCommit, "TARGETOS": "linux", "TARGETARCH": runtime.GOARCH} {
		if _, ok := vars[k]; !ok {
			return "", fmt.Errorf("build stage declares no ARG %s", k)
		}
		vars[k] = v
	}
	env, err := stageEnv(s, vars)
	if err != nil {
		return "", err
	}
	cmd, err := goBuildRun(s)
	if err != nil {
		return "", err
	}
	if strings.Count(cmd, " -o "+dockerOut+" ") != 1 {
		return "", fmt.Errorf("the go build command does not write %s: %s", dockerOut, cmd)
	}
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		return "", err
	}
	out := filepath.Join(outDir, "kinchain")
	cmd = strings.Replace(cmd, " -o "+dockerOut+" ", " -o "+out+" ", 1)

	ctxDir := filepath.Join(outDir, "context")
	if err := copyBuildContext(root, filepath.Join(root, "deploy", "Dockerfile.dockerignore"), ctxDir); err != nil {
		return "", err
	}
	c := exec.Command("sh", "-c", cmd)
	c.Dir = ctxDir
	c.Env = append(os.Environ(), "GOFLAGS=") // the golang image sets no GOFLAGS
	for k, v := range vars {
		c.Env = append(c.Env, k+"="+v)
	}
	for k, v := range env {
		c.Env = append(c.Env, k+"="+v)
	}
	if b, err := c.CombinedOutput(); err != nil {
		return "", fmt.Errorf("%s: %v\n%s", cmd, err, b)
	}
	return out, nil
}

// copyBuildContext copies root to dst, leaving out what the ignore file
// excludes (Docker's own pattern matcher).
func copyBuildContext(root, ignoreFile, dst string) error {
	f, err := os.Open(ignoreFile)
	if err != nil {
		return err
	}
	patterns, err := ignorefile.ReadAll(f)
	f.Close()
	if err != nil {
		return err
	}
	pm, err := patternmatcher.New(patterns)
	if err != nil {
		return err
	}
	if err := os.RemoveAll(dst); err != nil {
		return err
	}
	return filepath.WalkDir(root, func(p string, de fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(root, p)
		if err != nil {
			return err
		}
		if rel == "." {
			return os.MkdirAll(dst, 0o755)
		}
		rel = filepath.ToSlash(rel)
		skip, err := pm.MatchesOrParentMatches(rel)
		if err != nil {
			return err
		}
		if skip {
			if de.IsDir() && !pm.Exclusions() {
				return filepath.SkipDir
			}
			return nil
		}
		target := filepath.Join(dst, filepath.FromSlash(rel))
		switch {
		case de.IsDir():
			return os.MkdirAll(target, 0o755)
		case de.Type().IsRegular():
			b, err := os.ReadFile(p)
			if err != nil {
				return err
			}
			return os.WriteFile(target, b, 0o644)
		default:
			return nil // symlinks and the like: none in the repository
		}
	})
}

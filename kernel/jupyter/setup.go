package jupyter

import (
	"archive/tar"
	"bytes"
	"compress/gzip"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/counterpartlab/counterpart/kernel"
	"golang.org/x/mod/module"
	modzip "golang.org/x/mod/zip"
)

// The tools the kernel runs, built at the versions this module's go.mod requires.
var kernelTools = []struct{ name, pkg, module string }{
	{"gonb", "github.com/janpfeifer/gonb", "github.com/janpfeifer/gonb"},
	{"goimports", "golang.org/x/tools/cmd/goimports", "golang.org/x/tools"},
}

// SetupOptions configures Setup. Zero values choose the defaults.
type SetupOptions struct {
	Repo        string    // module checkout; default: found from the working folder
	DataDir     string    // Jupyter data folder; default $JUPYTER_DATA_DIR or ~/.local/share/jupyter
	KernelName  string    // default DefaultKernelName
	DisplayName string    // default DefaultDisplayName
	Force       bool      // redo every step
	Out         io.Writer // progress lines; default os.Stdout
}

// Installed describes what Setup installed.
type Installed struct {
	KernelDir     string // folder holding kernel.json
	ModuleVersion string // version of this module the kernel's proxy serves
	EChartsPath   string
	BinDir        string
}

// Setup makes the counterpart kernel available to Jupyter:
//
//  1. builds gonb and goimports at the versions in go.mod into the cache;
//  2. zips the checkout into a file-based module proxy under a fresh
//     version whenever its files changed, so a notebook can import the
//     module offline with no setup cell;
//  3. places ECharts 5.6.0 (fetched once with npm pack, checked by SHA-256);
//  4. writes the kernelspec, whose environment wires the above together.
//
// Each step prints what it did or why it was skipped; running Setup again is
// cheap.
func Setup(ctx context.Context, o SetupOptions) (*Installed, error) {
	if o.Out == nil {
		o.Out = os.Stdout
	}
	if o.KernelName == "" {
		o.KernelName = DefaultKernelName
	}
	if o.DisplayName == "" {
		o.DisplayName = DefaultDisplayName
	}
	say := func(format string, args ...any) { fmt.Fprintf(o.Out, format+"\n", args...) }

	goCmd, err := findGo()
	if err != nil {
		return nil, err
	}
	jupyterCmd, err := findJupyter()
	if err != nil {
		return nil, err
	}
	start := o.Repo
	if start == "" {
		if start, err = os.Getwd(); err != nil {
			return nil, err
		}
	}
	repo, err := FindModuleRoot(start)
	if err != nil {
		return nil, err
	}
	cache, err := kernel.CacheDir()
	if err != nil {
		return nil, err
	}
	dataDir, err := jupyterDataDir(o.DataDir)
	if err != nil {
		return nil, err
	}
	inst := &Installed{BinDir: filepath.Join(cache, "bin"), KernelDir: filepath.Join(dataDir, "kernels", o.KernelName)}
	say("counterpart setup: checkout %s, cache %s", repo, cache)

	t0 := time.Now()
	did, err := buildTools(ctx, goCmd, repo, inst.BinDir, o.Force)
	if err != nil {
		return nil, err
	}
	say("[1/5] %s (%s)", did, since(t0))

	t0 = time.Now()
	version, did, err := publishModule(repo, filepath.Join(cache, "proxy"), o.Force)
	if err != nil {
		return nil, err
	}
	inst.ModuleVersion = version
	say("[2/5] %s (%s)", did, since(t0))

	t0 = time.Now()
	did, err = warmModules(ctx, goCmd, filepath.Join(cache, "proxy"), version, o.Force)
	if err != nil {
		// Not fatal: a module cache filled earlier may already hold all a
		// notebook needs. Say plainly what may fail.
		did = fmt.Sprintf("could not resolve %s for notebooks (%v); notebooks will work offline only if the module cache already holds every dependency: run setup again with access to the Go module proxy", version, firstLine(err.Error()))
	}
	say("[3/5] %s (%s)", did, since(t0))

	t0 = time.Now()
	inst.EChartsPath, did, err = placeECharts(ctx, o.Force)
	if err != nil {
		return nil, err
	}
	say("[4/5] %s (%s)", did, since(t0))

	gomodcache, err := output(ctx, repo, nil, goCmd, "env", "GOMODCACHE")
	if err != nil {
		return nil, err
	}
	spec := kernelSpec(inst, o.DisplayName, filepath.Join(cache, "proxy"), strings.TrimSpace(string(gomodcache)), filepath.Dir(goCmd))
	did, err = writeKernelSpec(inst.KernelDir, spec, o.Force)
	if err != nil {
		return nil, err
	}
	say("[5/5] %s", did)

	// Ask Jupyter itself whether it sees the kernel (jupyter-client provides kernelspec).
	env := append(os.Environ(), "JUPYTER_DATA_DIR="+dataDir)
	if out, err := output(ctx, "", env, jupyterCmd, "kernelspec", "list", "--json"); err != nil {
		say("note: could not ask Jupyter for its kernels (%v); if notebooks do not list %q: %s", firstLine(err.Error()), o.KernelName, aptJupyter)
	} else if !strings.Contains(string(out), `"`+o.KernelName+`"`) {
		return nil, fmt.Errorf("kernel %q written to %s, but `jupyter kernelspec list` does not show it: is JUPYTER_DATA_DIR (%s) the folder your Jupyter reads?", o.KernelName, inst.KernelDir, dataDir)
	} else {
		say("Jupyter lists kernel %q (%s). Open a notebook with it, or: counterpart run NOTEBOOK --html OUT.html", o.KernelName, o.DisplayName)
	}
	return inst, nil
}

// warmModules resolves, once per published version and with network access,
// what a fresh notebook needs: a scratch module like the kernel's requires
// the published version and builds a program importing every package of the
// module. That downloads into the module cache every go.mod of the module
// graph (a dependency with a pre-1.17 go.mod pulls in its whole graph, which
// building the repository alone never fetches) and every zip the packages
// need, and warms the build cache, so that the kernel, whose GOPROXY lists
// only local files, resolves imports offline.
func warmModules(ctx context.Context, goCmd, proxy, version string, force bool) (string, error) {
	marker := filepath.Join(proxy, ".warmed-"+version)
	if !force {
		// Done before, and the module cache still holds the result (a
		// `go clean -modcache` since would have removed it).
		_, errMarker := os.Stat(marker)
		modcache, errCache := output(ctx, "", nil, goCmd, "env", "GOMODCACHE")
		if errMarker == nil && errCache == nil {
			zip := filepath.Join(strings.TrimSpace(string(modcache)), "cache", "download", filepath.FromSlash(ModulePath), "@v", version+".zip")
			if _, err := os.Stat(zip); err == nil {
				return fmt.Sprintf("skipped resolving %s for notebooks: done before", version), nil
			}
		}
	}
	dir, err := os.MkdirTemp("", "counterpart-warm-")
	if err != nil {
		return "", err
	}
	defer os.RemoveAll(dir)
	gover, err := output(ctx, dir, nil, goCmd, "env", "GOVERSION")
	if err != nil {
		return "", err
	}
	goLine := strings.TrimPrefix(strings.TrimSpace(string(gover)), "go")
	if i := strings.IndexAny(goLine, " -"); i > 0 {
		goLine = goLine[:i]
	}
	mod := "module counterpart.scratch\n"
	if goLine != "" && goLine[0] >= '0' && goLine[0] <= '9' {
		mod += "\ngo " + goLine + "\n" // a development toolchain ("devel …") gets no go line
	}
	main := "package main\n\nimport (\n"
	for _, p := range []string{"causal", "causal/scenario", "widgets", "kernel"} {
		main += "\t_ \"" + ModulePath + "/" + p + "\"\n"
	}
	main += ")\n\nfunc main() {}\n"
	if err := os.WriteFile(filepath.Join(dir, "go.mod"), []byte(mod), 0o644); err != nil {
		return "", err
	}
	if err := os.WriteFile(filepath.Join(dir, "main.go"), []byte(main), 0o644); err != nil {
		return "", err
	}
	upstream, err := output(ctx, dir, nil, goCmd, "env", "GOPROXY")
	if err != nil {
		return "", err
	}
	// Add to the user's own settings rather than replace them (private
	// module patterns, flags).
	join := func(name, sep, v string) string {
		if old := os.Getenv(name); old != "" {
			return name + "=" + old + sep + v
		}
		return name + "=" + v
	}
	env := append(os.Environ(),
		"GOPROXY=file://"+filepath.ToSlash(proxy)+","+strings.TrimSpace(string(upstream)),
		join("GONOSUMDB", ",", ModulePath), join("GOFLAGS", " ", "-mod=mod"), "GOTOOLCHAIN=local", "GOWORK=off")
	hint := "resolving the module graph for notebooks needs the Go module proxy once (run setup again with network access)"
	if _, err := output(ctx, dir, env, goCmd, "get", ModulePath+"@"+version); err != nil {
		return "", fmt.Errorf("%s: %v", hint, err)
	}
	if _, err := output(ctx, dir, env, goCmd, "build", "-o", os.DevNull, "."); err != nil {
		return "", fmt.Errorf("%s: %v", hint, err)
	}
	if err := writeFileAtomic(marker, []byte(version+"\n")); err != nil {
		return "", err
	}
	return fmt.Sprintf("resolved %s and its module graph into the module cache for offline notebooks", version), nil
}

func since(t time.Time) string { return time.Since(t).Round(10 * time.Millisecond).String() }

func firstLine(s string) string {
	if i := strings.IndexByte(s, '\n'); i >= 0 {
		return s[:i]
	}
	return s
}

// jupyterDataDir resolves the Jupyter data folder as Jupyter does on Linux.
func jupyterDataDir(dir string) (string, error) {
	if dir != "" {
		return filepath.Abs(dir)
	}
	if d := os.Getenv("JUPYTER_DATA_DIR"); d != "" {
		return filepath.Abs(d)
	}
	if d := os.Getenv("XDG_DATA_HOME"); d != "" {
		return filepath.Join(d, "jupyter"), nil
	}
	home, err := os.UserHomeDir()
	if err != nil {
		return "", fmt.Errorf("cannot find the Jupyter data folder: %w (set JUPYTER_DATA_DIR)", err)
	}
	return filepath.Join(home, ".local", "share", "jupyter"), nil
}

// buildTools builds gonb and goimports into bin unless a stamp shows the
// same versions were built by the same Go.
func buildTools(ctx context.Context, goCmd, repo, bin string, force bool) (string, error) {
	mf, err := readModFile(repo)
	if err != nil {
		return "", fmt.Errorf("reading %s/go.mod: %w", repo, err)
	}
	goVersion, err := output(ctx, repo, nil, goCmd, "env", "GOVERSION")
	if err != nil {
		return "", err
	}
	var stamp strings.Builder
	fmt.Fprintf(&stamp, "go %s\n", strings.TrimSpace(string(goVersion)))
	var names []string
	for _, t := range kernelTools {
		v, err := requiredVersion(mf, t.module)
		if err != nil {
			return "", err
		}
		fmt.Fprintf(&stamp, "%s %s@%s\n", t.name, t.pkg, v)
		names = append(names, t.name+" "+v)
	}
	stampPath := filepath.Join(bin, "tools.stamp")
	if !force {
		old, err := os.ReadFile(stampPath)
		fresh := err == nil && string(old) == stamp.String()
		for _, t := range kernelTools {
			fresh = fresh && fileExists(filepath.Join(bin, t.name))
		}
		if fresh {
			return "skipped building " + strings.Join(names, ", ") + ": already built in " + bin, nil
		}
	}
	if err := os.MkdirAll(bin, 0o755); err != nil {
		return "", err
	}
	for _, t := range kernelTools {
		// Built inside the checkout, so go.mod's versions (and go.sum) apply.
		if _, err := output(ctx, repo, nil, goCmd, "build", "-o", filepath.Join(bin, t.name), t.pkg); err != nil {
			return "", fmt.Errorf("building %s: %w", t.name, err)
		}
	}
	if err := writeFileAtomic(stampPath, []byte(stamp.String())); err != nil {
		return "", err
	}
	return "built " + strings.Join(names, ", ") + " into " + bin, nil
}

// proxyStamp records what the module proxy serves.
type proxyStamp struct {
	Version string `json:"version"`
	Hash    string `json:"hash"`
}

// publishModule zips the checkout into a file-based module proxy
// (<proxy>/<module>/@v/{list,V.info,V.mod,V.zip}). A new version is made when
// the files changed, so GoNB's `go get` picks up the new code; an unchanged
// checkout keeps its version and the module cache stays warm.
func publishModule(repo, proxy string, force bool) (version, did string, err error) {
	files, omitted, err := moduleFiles(repo)
	if err != nil {
		return "", "", err
	}
	hash, err := hashFiles(files)
	if err != nil {
		return "", "", err
	}
	escaped, err := module.EscapePath(ModulePath)
	if err != nil {
		return "", "", err
	}
	vdir := filepath.Join(proxy, filepath.FromSlash(escaped), "@v")
	stampPath := filepath.Join(proxy, "counterpart.stamp.json")
	var old proxyStamp
	if data, err := os.ReadFile(stampPath); err == nil {
		_ = json.Unmarshal(data, &old)
	}
	if !force && old.Hash == hash && old.Version != "" && fileExists(filepath.Join(vdir, old.Version+".zip")) {
		return old.Version, fmt.Sprintf("skipped the module proxy: checkout unchanged, still %s@%s", ModulePath, old.Version), nil
	}

	now := time.Now().UTC()
	version = "v0.0." + now.Format("20060102150405")
	for version <= old.Version && len(version) == len(old.Version) {
		now = now.Add(time.Second)
		version = "v0.0." + now.Format("20060102150405")
	}
	mv := module.Version{Path: ModulePath, Version: version}
	if err := os.MkdirAll(vdir, 0o755); err != nil {
		return "", "", err
	}
	var zbuf bytes.Buffer
	if err := modzip.Create(&zbuf, mv, files); err != nil {
		return "", "", fmt.Errorf("zipping the checkout for the kernel's module proxy: %w", err)
	}
	gomod, err := os.ReadFile(filepath.Join(repo, "go.mod"))
	if err != nil {
		return "", "", err
	}
	info, _ := json.Marshal(struct {
		Version string
		Time    string
	}{version, now.Format(time.RFC3339)})
	// Old versions go: the module cache keeps what earlier kernels fetched.
	entries, _ := os.ReadDir(vdir)
	for _, e := range entries {
		_ = os.Remove(filepath.Join(vdir, e.Name()))
	}
	for name, data := range map[string][]byte{
		version + ".mod":  gomod,
		version + ".info": info,
		version + ".zip":  zbuf.Bytes(),
	} {
		if err := writeFileAtomic(filepath.Join(vdir, name), data); err != nil {
			return "", "", err
		}
	}
	// The list is written last: a kernel starting meanwhile sees a complete version or none.
	if err := writeFileAtomic(filepath.Join(vdir, "list"), []byte(version+"\n")); err != nil {
		return "", "", err
	}
	stamp, _ := json.Marshal(proxyStamp{Version: version, Hash: hash})
	if err := writeFileAtomic(stampPath, stamp); err != nil {
		return "", "", err
	}
	did = fmt.Sprintf("published %s@%s (%d files, %d KiB) to the module proxy %s", ModulePath, version, len(files), zbuf.Len()/1024, proxy)
	if len(omitted) > 0 {
		did += fmt.Sprintf("; left out %d files a module zip cannot hold: %s", len(omitted), strings.Join(omitted, ", "))
	}
	return version, did, nil
}

// moduleFiles lists the checkout's files as a module zip holds them: no
// version-control folders, no nested modules, regular files only.
func moduleFiles(repo string) ([]modzip.File, []string, error) {
	var files []modzip.File
	err := filepath.WalkDir(repo, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(repo, p)
		if d.IsDir() {
			switch d.Name() {
			case ".git", ".hg", ".svn", ".bzr":
				return filepath.SkipDir
			}
			if p != repo && fileExists(filepath.Join(p, "go.mod")) {
				return filepath.SkipDir
			}
			return nil
		}
		if !d.Type().IsRegular() {
			return nil
		}
		info, err := d.Info()
		if err != nil {
			return err
		}
		files = append(files, dirFile{slash: filepath.ToSlash(rel), path: p, info: info})
		return nil
	})
	if err != nil {
		return nil, nil, fmt.Errorf("listing the checkout %s: %w", repo, err)
	}
	checked, err := modzip.CheckFiles(files)
	if err != nil && len(checked.Valid) == 0 {
		return nil, nil, fmt.Errorf("the checkout cannot be zipped as a module: %w", err)
	}
	keep := make(map[string]bool, len(checked.Valid))
	for _, v := range checked.Valid {
		keep[v] = true
	}
	var valid []modzip.File
	for _, f := range files {
		if keep[f.Path()] {
			valid = append(valid, f)
		}
	}
	var omitted []string
	for _, fe := range checked.Omitted {
		omitted = append(omitted, fe.Path)
	}
	for _, fe := range checked.Invalid {
		omitted = append(omitted, fe.Path+" ("+fe.Err.Error()+")")
	}
	// Omitted files that are merely outside the module (e.g. vendor) are fine;
	// a zip over the size limit is not.
	if checked.SizeError != nil {
		return nil, nil, fmt.Errorf("the checkout is too large for a module zip: %w", checked.SizeError)
	}
	return valid, omitted, nil
}

type dirFile struct {
	slash, path string
	info        fs.FileInfo
}

func (f dirFile) Path() string                 { return f.slash }
func (f dirFile) Lstat() (os.FileInfo, error)  { return f.info, nil }
func (f dirFile) Open() (io.ReadCloser, error) { return os.Open(f.path) }

// hashFiles hashes names, sizes and contents, in name order.
func hashFiles(files []modzip.File) (string, error) {
	sorted := append([]modzip.File(nil), files...)
	sort.Slice(sorted, func(i, j int) bool { return sorted[i].Path() < sorted[j].Path() })
	h := sha256.New()
	for _, f := range sorted {
		r, err := f.Open()
		if err != nil {
			return "", err
		}
		fmt.Fprintf(h, "%s\x00", f.Path())
		_, err = io.Copy(h, r)
		r.Close()
		if err != nil {
			return "", err
		}
		h.Write([]byte{0})
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

func writeFileAtomic(path string, data []byte) error {
	return kernel.WriteFileAtomic(path, data, 0o644)
}

func sha256File(p string) (string, int64, error) {
	f, err := os.Open(p)
	if err != nil {
		return "", 0, err
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	return hex.EncodeToString(h.Sum(nil)), n, err
}

// placeECharts makes sure the pinned ECharts build is in the cache (or uses
// COUNTERPART_ECHARTS when that names an existing file).
func placeECharts(ctx context.Context, force bool) (string, string, error) {
	if p := os.Getenv(kernel.EChartsEnv); p != "" && fileExists(p) {
		abs, err := filepath.Abs(p)
		if err != nil {
			return "", "", err
		}
		return abs, fmt.Sprintf("skipped fetching ECharts: using %s=%s", kernel.EChartsEnv, abs), nil
	}
	dest, err := kernel.EChartsCachePath()
	if err != nil {
		return "", "", err
	}
	if !force {
		if sum, n, err := sha256File(dest); err == nil && n == kernel.EChartsSize && sum == kernel.EChartsSHA256 {
			return dest, "skipped fetching ECharts " + kernel.EChartsVersion + ": " + dest + " is present and its SHA-256 matches", nil
		}
	}
	npm, err := findNpm()
	if err != nil {
		return "", "", err
	}
	tmp, err := os.MkdirTemp("", "counterpart-echarts-")
	if err != nil {
		return "", "", err
	}
	defer os.RemoveAll(tmp)
	if _, err := output(ctx, tmp, nil, npm, "pack", "echarts@"+kernel.EChartsVersion, "--prefer-offline", "--silent"); err != nil {
		return "", "", fmt.Errorf("fetching ECharts with npm (the npm registry must be reachable once): %w", err)
	}
	tgz := filepath.Join(tmp, "echarts-"+kernel.EChartsVersion+".tgz")
	wanted := map[string]string{
		"package/dist/echarts.min.js": "echarts.min.js",
		"package/LICENSE":             "LICENSE",
		"package/NOTICE":              "NOTICE",
	}
	got, err := extractFromTgz(tgz, wanted)
	if err != nil {
		return "", "", err
	}
	js := got["echarts.min.js"]
	sum := sha256.Sum256(js)
	if len(js) != kernel.EChartsSize || hex.EncodeToString(sum[:]) != kernel.EChartsSHA256 {
		return "", "", fmt.Errorf("the echarts.min.js from npm (%d bytes, sha256 %x) is not the pinned ECharts %s build (%d bytes, sha256 %s): check the npm registry in use",
			len(js), sum, kernel.EChartsVersion, kernel.EChartsSize, kernel.EChartsSHA256)
	}
	dir := filepath.Dir(dest)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", "", err
	}
	for name, data := range got {
		if err := writeFileAtomic(filepath.Join(dir, name), data); err != nil {
			return "", "", err
		}
	}
	return dest, fmt.Sprintf("fetched ECharts %s with npm into %s (Apache-2.0; LICENSE and NOTICE beside it)", kernel.EChartsVersion, dest), nil
}

// extractFromTgz reads the named members of a gzip-compressed tar.
func extractFromTgz(path string, wanted map[string]string) (map[string][]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("npm pack left no %s: %w", filepath.Base(path), err)
	}
	defer f.Close()
	gz, err := gzip.NewReader(f)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	tr := tar.NewReader(gz)
	got := make(map[string][]byte)
	for {
		h, err := tr.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, fmt.Errorf("%s: %w", path, err)
		}
		name, ok := wanted[h.Name]
		if !ok || h.Typeflag != tar.TypeReg {
			continue
		}
		data, err := io.ReadAll(io.LimitReader(tr, 64<<20))
		if err != nil {
			return nil, fmt.Errorf("%s: %s: %w", path, h.Name, err)
		}
		got[name] = data
	}
	if _, ok := got["echarts.min.js"]; !ok {
		return nil, fmt.Errorf("%s holds no package/dist/echarts.min.js", path)
	}
	return got, nil
}

// KernelSpec is the kernel.json Jupyter reads.
type KernelSpec struct {
	Argv          []string          `json:"argv"`
	DisplayName   string            `json:"display_name"`
	Language      string            `json:"language"`
	InterruptMode string            `json:"interrupt_mode"`
	Env           map[string]string `json:"env"`
	Metadata      map[string]any    `json:"metadata,omitempty"`
}

func kernelSpec(inst *Installed, displayName, proxy, gomodcache, goBin string) KernelSpec {
	path := inst.BinDir + string(os.PathListSeparator) + goBin
	if p := os.Getenv("PATH"); p != "" {
		path += string(os.PathListSeparator) + p
	}
	return KernelSpec{
		// The argv GoNB's own --install writes.
		Argv:          []string{filepath.Join(inst.BinDir, "gonb"), "--kernel", "{connection_file}"},
		DisplayName:   displayName,
		Language:      "go",
		InterruptMode: "message",
		Env: map[string]string{
			// Our module from the local proxy; everything else from the module cache.
			// Only local files are listed, so nothing can come from the network.
			"GOPROXY":    "file://" + filepath.ToSlash(proxy) + ",file://" + filepath.ToSlash(filepath.Join(gomodcache, "cache", "download")),
			"GOMODCACHE": gomodcache,
			"GONOSUMDB":  ModulePath,
			// The kernel's scratch module has no go.sum, so Go would ask the
			// checksum database about every dependency; offline that fails unless
			// an earlier `go get` happened to cache the answers (a fresh machine
			// has none: building the repository checks its go.sum instead). No
			// network source is listed above: the kernel trusts the local module
			// cache as it is (whatever checks applied when its entries were
			// downloaded — for this repository's modules, its go.sum), so the
			// lookup is turned off.
			"GOSUMDB":     "off",
			"GOFLAGS":     "-mod=mod",
			"GOTOOLCHAIN": "local",
			"PATH":        path,

			kernel.EChartsEnv: inst.EChartsPath,
		},
		Metadata: map[string]any{"counterpart": map[string]any{"module_version": inst.ModuleVersion}},
	}
}

func writeKernelSpec(dir string, spec KernelSpec, force bool) (string, error) {
	data, err := json.MarshalIndent(spec, "", "  ")
	if err != nil {
		return "", err
	}
	data = append(data, '\n')
	p := filepath.Join(dir, "kernel.json")
	if old, err := os.ReadFile(p); err == nil && bytes.Equal(old, data) && !force && fileExists(filepath.Join(dir, "logo-svg.svg")) {
		return "skipped the kernelspec: " + p + " is up to date", nil
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", err
	}
	if err := writeFileAtomic(p, data); err != nil {
		return "", err
	}
	if err := writeFileAtomic(filepath.Join(dir, "logo-svg.svg"), []byte(logoSVG)); err != nil {
		return "", err
	}
	return fmt.Sprintf("installed the kernelspec %q (%s) in %s", filepath.Base(dir), spec.DisplayName, dir), nil
}

// logoSVG is the kernel's icon: two overlapping discs in the treated and
// control colours — the overlap the package is about.
const logoSVG = `<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 64 64" width="64" height="64">
<circle cx="24" cy="32" r="18" fill="#0f766e" fill-opacity="0.85"/>
<circle cx="40" cy="32" r="18" fill="#d97706" fill-opacity="0.75"/>
</svg>
`

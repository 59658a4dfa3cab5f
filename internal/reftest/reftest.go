// Package reftest finds the outside reference tools that tests check muarc
// against: Debian's /usr/bin/python3 with named modules (h5py, jsonschema,
// numpy, scipy, pandas) and command-line tools (h5dump, sha256sum,
// chromium). Under CI (the CI environment variable set) a missing reference
// fails the test; elsewhere the test is skipped.
package reftest

import (
	"os"
	"os/exec"
	"strings"
	"sync"
	"testing"
)

// Python is Debian's interpreter; the first python3 on PATH may be another
// one without the Debian modules.
const Python = "/usr/bin/python3"

// pythonChecks caches the answer per module list: one interpreter start
// per list and test binary, however many tests ask.
var pythonChecks sync.Map // string -> string (empty when importable)

// NeedPython returns Python after checking that it imports every module.
func NeedPython(t testing.TB, modules ...string) string {
	t.Helper()
	code := "import " + strings.Join(append([]string{"sys"}, modules...), ", ")
	res, ok := pythonChecks.Load(code)
	if !ok {
		out, err := exec.Command(Python, "-c", code).CombinedOutput()
		msg := ""
		if err != nil {
			msg = err.Error() + ": " + string(out)
		}
		res, _ = pythonChecks.LoadOrStore(code, msg)
	}
	if msg := res.(string); msg != "" {
		missing(t, "python3 modules "+strings.Join(modules, ", ")+" (Debian python3-<module>)", msg)
	}
	return Python
}

// NeedTool returns the path of a command, named with its Debian package.
func NeedTool(t testing.TB, name, debianPackage string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		missing(t, name+" (Debian "+debianPackage+")", err.Error())
	}
	return p
}

func missing(t testing.TB, what, detail string) {
	t.Helper()
	if os.Getenv("CI") != "" {
		t.Fatalf("%s is required under CI: %s", what, strings.TrimSpace(detail))
	}
	t.Skipf("%s not available: %s", what, strings.TrimSpace(detail))
}

// NeedFile checks that a file or folder an outside reference needs exists
// (for example an npm package that make test installs); what names it.
func NeedFile(t testing.TB, path, what string) string {
	t.Helper()
	if _, err := os.Stat(path); err != nil {
		missing(t, what, err.Error())
	}
	return path
}

// NeedR returns Rscript after checking that R loads every package named
// (Debian r-cran-<package>).
func NeedR(t testing.TB, packages ...string) string {
	t.Helper()
	rs := NeedTool(t, "Rscript", "r-base-core")
	code := ""
	for _, p := range packages {
		code += "suppressPackageStartupMessages(library(" + p + "));"
	}
	if out, err := exec.Command(rs, "-e", code).CombinedOutput(); err != nil {
		missing(t, "R packages "+strings.Join(packages, ", ")+" (Debian r-cran-<package>)", err.Error()+": "+string(out))
	}
	return rs
}

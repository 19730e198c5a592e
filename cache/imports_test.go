package cache

import (
	"go/parser"
	"go/token"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// cache stores opaque values: it must not depend on the science, the wire
// contract or the observability stack (see the dependency rule in DESIGN.md).
func TestImportsStayOpaque(t *testing.T) {
	forbidden := []string{
		"github.com/fugad/fugad/", // no other package of ours
		"google.golang.org/grpc", "google.golang.org/protobuf", "google.golang.org/genproto",
		"github.com/prometheus/", "go.uber.org/zap",
	}
	files, err := filepath.Glob("*.go")
	if err != nil || len(files) == 0 {
		t.Fatalf("no Go files: %v", err)
	}
	fset := token.NewFileSet()
	for _, name := range files {
		src, err := os.ReadFile(name)
		if err != nil {
			t.Fatal(err)
		}
		f, err := parser.ParseFile(fset, name, src, parser.ImportsOnly)
		if err != nil {
			t.Fatal(err)
		}
		for _, imp := range f.Imports {
			path, _ := strconv.Unquote(imp.Path.Value)
			for _, bad := range forbidden {
				if strings.HasPrefix(path, bad) {
					t.Errorf("%s imports %s", name, path)
				}
			}
		}
	}
}

package loop

import (
	"os/exec"
	"strings"
	"testing"
)

// TestPureGoLayers enforces the layering rule of DESIGN.md: packages fading
// and loop (and loop's subpackages) import neither grpc nor the generated
// protobuf code, directly or through a dependency.
func TestPureGoLayers(t *testing.T) {
	if _, err := exec.LookPath("go"); err != nil {
		t.Skip("go tool not on PATH")
	}
	cmd := exec.Command("go", "list", "-deps", "-f", "{{.ImportPath}}",
		"github.com/fadeloop/fadeloop/fading/...",
		"github.com/fadeloop/fadeloop/loop/...")
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("go list: %v\n%s", err, out)
	}
	deps := strings.Fields(string(out))
	if len(deps) == 0 {
		t.Fatal("go list returned no packages")
	}
	forbidden := []string{
		"google.golang.org/grpc",
		"google.golang.org/protobuf",
		"github.com/fadeloop/fadeloop/proto",
		"github.com/fadeloop/fadeloop/service",
		"github.com/fadeloop/fadeloop/client",
	}
	for _, d := range deps {
		for _, f := range forbidden {
			if d == f || strings.HasPrefix(d, f+"/") {
				t.Errorf("pure layer depends on %s (forbidden prefix %s)", d, f)
			}
		}
	}
}

package deploy

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"regexp"
	"strings"
	"testing"

	appsv1 "k8s.io/api/apps/v1"
	corev1 "k8s.io/api/core/v1"
	kjson "sigs.k8s.io/json"
	"sigs.k8s.io/yaml"
)

// manifests decodes every document of every manifest strictly (unknown or
// misspelt fields fail) into its Kubernetes API type, keyed by kind/name.
func manifests(t *testing.T) map[string]any {
	t.Helper()
	out := map[string]any{}
	for _, file := range []string{"nats.yaml", "fadeloopd.yaml", "worker.yaml"} {
		b, err := os.ReadFile(file)
		if err != nil {
			t.Fatal(err)
		}
		for i, doc := range regexp.MustCompile(`(?m)^---\s*$`).Split(string(b), -1) {
			if strings.TrimSpace(stripComments(doc)) == "" {
				continue
			}
			js, err := yaml.YAMLToJSON([]byte(doc))
			if err != nil {
				t.Fatalf("%s document %d: %v", file, i, err)
			}
			var meta struct {
				APIVersion string `json:"apiVersion"`
				Kind       string `json:"kind"`
				Metadata   struct {
					Name string `json:"name"`
				} `json:"metadata"`
			}
			if err := json.Unmarshal(js, &meta); err != nil {
				t.Fatalf("%s document %d: %v", file, i, err)
			}
			var obj any
			switch meta.APIVersion + " " + meta.Kind {
			case "apps/v1 Deployment":
				obj = &appsv1.Deployment{}
			case "apps/v1 StatefulSet":
				obj = &appsv1.StatefulSet{}
			case "v1 Service":
				obj = &corev1.Service{}
			case "v1 ConfigMap":
				obj = &corev1.ConfigMap{}
			default:
				t.Fatalf("%s document %d: unexpected %s %s", file, i, meta.APIVersion, meta.Kind)
			}
			if err := strictDecode(js, obj); err != nil {
				t.Fatalf("%s document %d (%s %s): %v", file, i, meta.Kind, meta.Metadata.Name, err)
			}
			key := meta.Kind + "/" + meta.Metadata.Name
			if _, dup := out[key]; dup {
				t.Fatalf("%s defined twice", key)
			}
			out[key] = obj
		}
	}
	return out
}

func stripComments(doc string) string {
	var b strings.Builder
	for _, l := range strings.Split(doc, "\n") {
		if !strings.HasPrefix(strings.TrimSpace(l), "#") {
			b.WriteString(l + "\n")
		}
	}
	return b.String()
}

// TestStrictDecodeCatchesTypos: the decoder used by TestManifests rejects a
// misspelt field (so the check can fail).
func TestStrictDecodeCatchesTypos(t *testing.T) {
	js, err := yaml.YAMLToJSON([]byte("apiVersion: apps/v1\nkind: Deployment\nspec:\n  replica: 3\n"))
	if err != nil {
		t.Fatal(err)
	}
	if err := strictDecode(js, &appsv1.Deployment{}); err == nil || !strings.Contains(err.Error(), "replica") {
		t.Errorf("misspelt spec.replica decoded without error: %v", err)
	}
	// Go's encoding/json matches field names case-insensitively; the
	// Kubernetes API server does not, nor does strictDecode.
	js, err = yaml.YAMLToJSON([]byte("apiVersion: apps/v1\nkind: StatefulSet\nspec:\n  servicename: nats\n"))
	if err != nil {
		t.Fatal(err)
	}
	if err := strictDecode(js, &appsv1.StatefulSet{}); err == nil || !strings.Contains(err.Error(), "servicename") {
		t.Errorf("wrongly cased spec.servicename decoded without error: %v", err)
	}
}

// strictDecode decodes js into obj as the Kubernetes API server does
// (sigs.k8s.io/json: case-sensitive field names), failing on unknown or
// duplicate fields.
func strictDecode(js []byte, obj any) error {
	strict, err := kjson.UnmarshalStrict(js, obj)
	if err != nil {
		return err
	}
	return errors.Join(strict...)
}

// flagNames are the flags fadeloopd and `fadeloopd worker` define, read
// from their sources (fs.XxxVar(&o.field, "name", ...)).
func flagNames(t *testing.T) map[string]bool {
	t.Helper()
	re := regexp.MustCompile(`fs\.\w+Var\(&o\.\w+, "([a-z-]+)"`)
	out := map[string]bool{}
	for _, f := range []string{"../cmd/fadeloopd/main.go", "../cmd/fadeloopd/worker.go"} {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		for _, m := range re.FindAllStringSubmatch(string(b), -1) {
			out[m[1]] = true
		}
	}
	if !out["listen"] || !out["queue"] {
		t.Fatalf("flag scan found %v; expected listen and queue", out)
	}
	return out
}

func checkArgs(t *testing.T, where string, args []string, flags map[string]bool) map[string]string {
	vals := map[string]string{}
	for _, a := range args {
		if a == "worker" {
			continue
		}
		name, val, ok := strings.Cut(strings.TrimLeft(a, "-"), "=")
		if !strings.HasPrefix(a, "-") || !ok || !flags[name] {
			t.Errorf("%s: argument %q is not -flag=value with a fadeloopd flag", where, a)
		}
		vals[name] = val
	}
	return vals
}

func checkPod(t *testing.T, where string, spec corev1.PodSpec) {
	sc := spec.SecurityContext
	if sc == nil || sc.RunAsNonRoot == nil || !*sc.RunAsNonRoot || sc.RunAsUser == nil || *sc.RunAsUser == 0 {
		t.Errorf("%s: pod must run as a non-root user", where)
	}
	for _, c := range spec.Containers {
		cs := c.SecurityContext
		if cs == nil || cs.AllowPrivilegeEscalation == nil || *cs.AllowPrivilegeEscalation ||
			cs.ReadOnlyRootFilesystem == nil || !*cs.ReadOnlyRootFilesystem {
			t.Errorf("%s/%s: container must forbid privilege escalation and have a read-only root", where, c.Name)
		}
		if c.Resources.Requests.Cpu().IsZero() || c.Resources.Limits.Memory().IsZero() {
			t.Errorf("%s/%s: container needs a CPU request and a memory limit", where, c.Name)
		}
	}
}

func selects(sel map[string]string, labels map[string]string) bool {
	if len(sel) == 0 {
		return false
	}
	for k, v := range sel {
		if labels[k] != v {
			return false
		}
	}
	return true
}

// TestManifests: the manifests decode strictly and fit together: a
// 3-replica NATS StatefulSet with JetStream and routes to each pod, the
// fadeloopd Deployment behind a headless Service on its gRPC port, and a
// worker Deployment whose --queue names the NATS pods.
func TestManifests(t *testing.T) {
	m := manifests(t)
	flags := flagNames(t)
	get := func(key string) any {
		o, ok := m[key]
		if !ok {
			t.Fatalf("no %s in the manifests", key)
		}
		return o
	}
	nats := get("StatefulSet/nats").(*appsv1.StatefulSet)
	if nats.Spec.Replicas == nil || *nats.Spec.Replicas != 3 {
		t.Errorf("NATS StatefulSet: want 3 replicas")
	}
	natsSvc := get("Service/nats").(*corev1.Service)
	if natsSvc.Spec.ClusterIP != corev1.ClusterIPNone || nats.Spec.ServiceName != natsSvc.Name {
		t.Errorf("NATS: the StatefulSet's serviceName must be the headless Service nats")
	}
	if !selects(natsSvc.Spec.Selector, nats.Spec.Template.Labels) || !selects(nats.Spec.Selector.MatchLabels, nats.Spec.Template.Labels) {
		t.Errorf("NATS: selectors do not match the pod labels")
	}
	checkPod(t, "nats", nats.Spec.Template.Spec)
	conf := get("ConfigMap/nats-config").(*corev1.ConfigMap).Data["nats.conf"]
	if !strings.Contains(conf, "jetstream {") || !strings.Contains(conf, "store_dir: /data/jetstream") {
		t.Errorf("nats.conf does not enable JetStream on the data volume:\n%s", conf)
	}
	for i := range 3 {
		if r := fmt.Sprintf("nats://nats-%d.nats:6222", i); !strings.Contains(conf, r) {
			t.Errorf("nats.conf lacks the route %s", r)
		}
	}

	d := get("Deployment/fadeloopd").(*appsv1.Deployment)
	svc := get("Service/fadeloopd").(*corev1.Service)
	if svc.Spec.ClusterIP != corev1.ClusterIPNone {
		t.Errorf("fadeloopd Service must be headless (clusterIP: None) for client-side balancing")
	}
	if !selects(svc.Spec.Selector, d.Spec.Template.Labels) || !selects(d.Spec.Selector.MatchLabels, d.Spec.Template.Labels) {
		t.Errorf("fadeloopd: selectors do not match the pod labels")
	}
	checkPod(t, "fadeloopd", d.Spec.Template.Spec)
	c := d.Spec.Template.Spec.Containers[0]
	vals := checkArgs(t, "fadeloopd", c.Args, flags)
	if vals["listen"] != "0.0.0.0:8470" || c.Ports[0].ContainerPort != 8470 || svc.Spec.Ports[0].Port != 8470 ||
		svc.Spec.Ports[0].TargetPort.StrVal != c.Ports[0].Name || c.ReadinessProbe == nil || c.ReadinessProbe.GRPC == nil ||
		c.ReadinessProbe.GRPC.Port != 8470 {
		t.Errorf("fadeloopd: listen %q, container port, Service port and gRPC probe must agree on 8470", vals["listen"])
	}

	w := get("Deployment/fadeloop-worker").(*appsv1.Deployment)
	checkPod(t, "worker", w.Spec.Template.Spec)
	if !selects(w.Spec.Selector.MatchLabels, w.Spec.Template.Labels) || selects(svc.Spec.Selector, w.Spec.Template.Labels) {
		t.Errorf("worker: selector mismatch, or the fadeloopd Service would route to workers")
	}
	wc := w.Spec.Template.Spec.Containers[0]
	if len(wc.Args) == 0 || wc.Args[0] != "worker" {
		t.Fatalf("worker container args %v must start with the worker subcommand", wc.Args)
	}
	wv := checkArgs(t, "worker", wc.Args, flags)
	urls := strings.Split(wv["queue"], ",")
	if len(urls) != 3 || wv["replicas"] != "3" {
		t.Errorf("worker: -queue %q must name the 3 NATS pods and -replicas be 3", wv["queue"])
	}
	for i, u := range urls {
		if want := fmt.Sprintf("nats://nats-%d.%s:4222", i, natsSvc.Name); u != want {
			t.Errorf("worker -queue entry %d: %q, want %q", i, u, want)
		}
	}
	if wc.Image != c.Image {
		t.Errorf("worker image %q differs from fadeloopd's %q (the worker is a fadeloopd subcommand)", wc.Image, c.Image)
	}
}

// TestContainerfile: the image is built static (CGO off) from the fadeloopd
// command with the Go version of go.mod, and runs as a non-root user.
func TestContainerfile(t *testing.T) {
	f, err := os.Open("Containerfile")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var froms []string
	var lines []string // instructions after the last FROM
	var build string
	s := bufio.NewScanner(f)
	for s.Scan() {
		l := strings.TrimSpace(s.Text())
		if l == "" || strings.HasPrefix(l, "#") {
			continue
		}
		if strings.HasPrefix(l, "FROM ") {
			froms = append(froms, l)
			lines = nil
			continue
		}
		if strings.HasPrefix(l, "RUN ") && strings.Contains(l, "go build") {
			build = l
		}
		lines = append(lines, l)
	}
	gomod, err := os.ReadFile("../../go.mod")
	if err != nil {
		t.Fatal(err)
	}
	goVer := regexp.MustCompile(`(?m)^go (\d+\.\d+)`).FindSubmatch(gomod)
	if len(froms) != 2 || goVer == nil || !strings.Contains(froms[0], "golang:"+string(goVer[1])) || !strings.HasSuffix(froms[0], " AS build") {
		t.Errorf("first stage must be golang:%s AS build; stages %q", goVer[1], froms)
	}
	for _, want := range []string{"CGO_ENABLED=0", "-trimpath", "./service/cmd/fadeloopd"} {
		if !strings.Contains(build, want) {
			t.Errorf("build step %q lacks %s", build, want)
		}
	}
	var user string
	var entry bool
	for _, l := range lines {
		switch {
		case strings.HasPrefix(l, "USER "):
			user = strings.TrimPrefix(l, "USER ")
		case strings.HasPrefix(l, "ENTRYPOINT "):
			entry = strings.Contains(l, `"/fadeloopd"`)
		case strings.HasPrefix(l, "RUN "):
			t.Errorf("final stage runs %q: it must only copy the static binary", l)
		}
	}
	if uid, _, _ := strings.Cut(user, ":"); uid == "" || uid == "0" || uid == "root" || strings.Trim(uid, "0123456789") != "" {
		t.Errorf("final stage USER %q: want a numeric non-root user", user)
	}
	if !entry {
		t.Errorf("final stage lacks ENTRYPOINT [\"/fadeloopd\"]")
	}
}

package deploy

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	appsv1 "k8s.io/api/apps/v1"
	corev1 "k8s.io/api/core/v1"
	policyv1 "k8s.io/api/policy/v1"
	"k8s.io/apimachinery/pkg/apis/meta/v1"
	"k8s.io/apimachinery/pkg/labels"
	"k8s.io/apimachinery/pkg/util/intstr"
	kjson "sigs.k8s.io/json"
	"sigs.k8s.io/yaml"
)

// manifest is one decoded Kubernetes object and where it came from.
type manifest struct {
	where string // file and document number
	obj   any    // a pointer to the API type of its kind
}

// newObject returns an empty object of the API type an apiVersion and
// kind name, or an error for a kind the tests do not know.
func newObject(apiVersion, kind string) (any, error) {
	switch apiVersion + " " + kind {
	case "v1 Namespace":
		return &corev1.Namespace{}, nil
	case "v1 Secret":
		return &corev1.Secret{}, nil
	case "v1 Service":
		return &corev1.Service{}, nil
	case "apps/v1 Deployment":
		return &appsv1.Deployment{}, nil
	case "policy/v1 PodDisruptionBudget":
		return &policyv1.PodDisruptionBudget{}, nil
	}
	return nil, fmt.Errorf("unknown kind %q of %q", kind, apiVersion)
}

var docSeparator = regexp.MustCompile(`(?m)^---[ \t]*$`)

// loadManifests decodes every document of every YAML file under
// deploy/kubernetes strictly (an unknown or misspelt field fails) into
// the API type its apiVersion and kind name.
func loadManifests(t *testing.T) []manifest {
	t.Helper()
	files, err := filepath.Glob(filepath.Join(root, "deploy", "kubernetes", "*.y*ml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no manifests under deploy/kubernetes (%v)", err)
	}
	var out []manifest
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		for i, doc := range docSeparator.Split(string(b), -1) {
			where := fmt.Sprintf("%s document %d", filepath.Base(f), i+1)
			if len(bytes.TrimSpace(stripComments([]byte(doc)))) == 0 {
				continue
			}
			var tm v1.TypeMeta
			if err := yaml.Unmarshal([]byte(doc), &tm); err != nil {
				t.Fatalf("%s: %v", where, err)
			}
			obj, err := newObject(tm.APIVersion, tm.Kind)
			if err != nil {
				t.Fatalf("%s: %v", where, err)
			}
			if err := decodeStrict([]byte(doc), obj); err != nil {
				t.Fatalf("%s: %T: %v", where, obj, err)
			}
			out = append(out, manifest{where: where, obj: obj})
		}
	}
	return out
}

// decodeStrict decodes one YAML document as the API server would in
// strict field validation: duplicate keys, unknown fields and fields in
// the wrong case (encoding/json would take them) are errors.
func decodeStrict(doc []byte, obj any) error {
	js, err := yaml.YAMLToJSONStrict(doc)
	if err != nil {
		return fmt.Errorf("yaml: %w", err)
	}
	strict, err := kjson.UnmarshalStrict(js, obj)
	if err != nil {
		return fmt.Errorf("decode: %w", err)
	}
	if len(strict) > 0 {
		return fmt.Errorf("strict decode: %v", strict)
	}
	return nil
}

// stripComments drops comment lines, to tell an empty document.
func stripComments(b []byte) []byte {
	var out [][]byte
	for _, l := range bytes.Split(b, []byte("\n")) {
		if !bytes.HasPrefix(bytes.TrimSpace(l), []byte("#")) {
			out = append(out, l)
		}
	}
	return bytes.Join(out, []byte("\n"))
}

func TestKubernetesManifests(t *testing.T) {
	t.Parallel()
	var (
		deployments []*appsv1.Deployment
		services    []*corev1.Service
		pdbs        []*policyv1.PodDisruptionBudget
		secrets     = map[string]*corev1.Secret{}
		namespaces  = map[string]bool{}
	)
	manifests := loadManifests(t)
	for _, m := range manifests {
		switch o := m.obj.(type) {
		case *appsv1.Deployment:
			deployments = append(deployments, o)
		case *corev1.Service:
			services = append(services, o)
		case *policyv1.PodDisruptionBudget:
			pdbs = append(pdbs, o)
		case *corev1.Secret:
			secrets[o.Name] = o
		case *corev1.Namespace:
			if o.Name == "" {
				t.Errorf("%s: namespace without a name", m.where)
			}
			namespaces[o.Name] = true
		}
	}
	if len(namespaces) != 1 {
		t.Errorf("want one Namespace; got %d", len(namespaces))
	}
	// Every other object lives in that namespace; checked once all are
	// read, whatever order the files come in.
	for _, m := range manifests {
		if _, ok := m.obj.(*corev1.Namespace); ok {
			continue
		}
		ns := m.obj.(interface{ GetNamespace() string }).GetNamespace()
		if ns == "" {
			t.Errorf("%s: no namespace", m.where)
		} else if !namespaces[ns] {
			t.Errorf("%s: namespace %q is not the one namespace.yaml makes", m.where, ns)
		}
	}
	if len(deployments) != 1 || len(services) != 1 || secrets["kelvard"] == nil {
		t.Fatalf("want one Deployment, one Service and the Secret kelvard; got %d, %d, %v", len(deployments), len(services), len(secrets))
	}
	d := deployments[0]
	pod := d.Spec.Template

	if d.Spec.Replicas == nil || *d.Spec.Replicas < 2 {
		t.Fatal("Deployment replicas unset or below 2")
	}
	sel, err := v1.LabelSelectorAsSelector(d.Spec.Selector)
	if err != nil || sel.Empty() || !sel.Matches(labels.Set(pod.Labels)) {
		t.Errorf("Deployment selector %v does not match its pod labels %v (%v)", d.Spec.Selector, pod.Labels, err)
	}
	svc := services[0]
	if len(svc.Spec.Selector) == 0 || !labels.SelectorFromSet(svc.Spec.Selector).Matches(labels.Set(pod.Labels)) {
		t.Errorf("Service selector %v does not match the pod labels %v", svc.Spec.Selector, pod.Labels)
	}
	for _, p := range pdbs {
		s, err := v1.LabelSelectorAsSelector(p.Spec.Selector)
		if err != nil || s.Empty() || !s.Matches(labels.Set(pod.Labels)) {
			t.Errorf("PodDisruptionBudget %s selector does not match the pods", p.Name)
		}
		if p.Spec.MinAvailable != nil && p.Spec.MinAvailable.IntValue() >= int(*d.Spec.Replicas) {
			t.Errorf("PodDisruptionBudget minAvailable %v blocks every eviction", p.Spec.MinAvailable)
		}
	}

	psc := pod.Spec.SecurityContext
	if psc == nil || psc.RunAsNonRoot == nil || !*psc.RunAsNonRoot || psc.RunAsUser == nil || *psc.RunAsUser == 0 {
		t.Errorf("pod securityContext must run as a non-root numeric user: %+v", psc)
	}
	if len(pod.Spec.Containers) != 1 {
		t.Fatalf("%d containers, want 1", len(pod.Spec.Containers))
	}
	c := pod.Spec.Containers[0]
	sc := c.SecurityContext
	switch {
	case sc == nil:
		t.Error("container has no securityContext")
	case sc.ReadOnlyRootFilesystem == nil || !*sc.ReadOnlyRootFilesystem:
		t.Error("container root filesystem is writable")
	case sc.AllowPrivilegeEscalation == nil || *sc.AllowPrivilegeEscalation:
		t.Error("container allows privilege escalation")
	case sc.Capabilities == nil || len(sc.Capabilities.Drop) != 1 || sc.Capabilities.Drop[0] != "ALL" || len(sc.Capabilities.Add) > 0:
		t.Errorf("container capabilities %+v, want drop ALL and add none", sc.Capabilities)
	}
	for _, r := range []corev1.ResourceName{corev1.ResourceCPU, corev1.ResourceMemory} {
		if _, ok := c.Resources.Requests[r]; !ok {
			t.Errorf("no %s request", r)
		}
	}
	if _, ok := c.Resources.Limits[corev1.ResourceMemory]; !ok {
		t.Error("no memory limit")
	}

	// Probes on the routes kelvard serves (api/routes.go), on the port
	// the container declares; the Service sends traffic to that port too.
	ports := map[string]int32{}
	for _, p := range c.Ports {
		ports[p.Name] = p.ContainerPort
	}
	portOf := func(p intstr.IntOrString) int32 {
		if p.Type == intstr.String {
			return ports[p.StrVal]
		}
		return p.IntVal
	}
	if ports["http"] != 8080 {
		t.Errorf("container port http = %d, want 8080 (the image's KELVARD_LISTEN)", ports["http"])
	}
	for _, pr := range []struct {
		name  string
		probe *corev1.Probe
		path  string
	}{
		{"readiness", c.ReadinessProbe, "/readyz"},
		{"liveness", c.LivenessProbe, "/healthz"},
	} {
		if pr.probe == nil || pr.probe.HTTPGet == nil {
			t.Errorf("%s probe missing or not HTTP", pr.name)
			continue
		}
		if pr.probe.HTTPGet.Path != pr.path {
			t.Errorf("%s probe path %q, want %q", pr.name, pr.probe.HTTPGet.Path, pr.path)
		}
		if got := portOf(pr.probe.HTTPGet.Port); got != 8080 {
			t.Errorf("%s probe port %v is not the container port", pr.name, pr.probe.HTTPGet.Port)
		}
	}
	for _, sp := range svc.Spec.Ports {
		if portOf(sp.TargetPort) != 8080 {
			t.Errorf("Service port %d targets %v, not the container port", sp.Port, sp.TargetPort)
		}
	}

	// Every secret the pod reads is defined, key by key.
	env := map[string]bool{}
	for _, e := range c.Env {
		env[e.Name] = true
		if e.ValueFrom == nil || e.ValueFrom.SecretKeyRef == nil {
			continue
		}
		ref := e.ValueFrom.SecretKeyRef
		s := secrets[ref.Name]
		if s == nil {
			t.Errorf("%s reads Secret %q, which no manifest defines", e.Name, ref.Name)
			continue
		}
		_, inString := s.StringData[ref.Key]
		_, inData := s.Data[ref.Key]
		if !inString && !inData {
			t.Errorf("%s reads key %q, which Secret %q does not define", e.Name, ref.Key, ref.Name)
		}
	}
	for _, want := range []string{"KELVARD_DATABASE_URL", "KELVARD_BOOTSTRAP_TOKEN", "KELVARD_SESSION_KEY"} {
		if !env[want] {
			t.Errorf("the pod does not set %s", want)
		}
	}
	for _, v := range secrets["kelvard"].StringData {
		if !strings.Contains(v, "CHANGE-ME") {
			t.Errorf("Secret value %q is not an obvious placeholder", v)
		}
	}
}

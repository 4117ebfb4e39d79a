package deploy

import (
	"bytes"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"

	monitoringv1 "github.com/prometheus-operator/prometheus-operator/pkg/apis/monitoring/v1"
	appsv1 "k8s.io/api/apps/v1"
	autoscalingv2 "k8s.io/api/autoscaling/v2"
	corev1 "k8s.io/api/core/v1"
	networkingv1 "k8s.io/api/networking/v1"
	policyv1 "k8s.io/api/policy/v1"
	"k8s.io/apimachinery/pkg/labels"
	"sigs.k8s.io/kustomize/api/krusty"
	kustomizetypes "sigs.k8s.io/kustomize/api/types"
	"sigs.k8s.io/kustomize/kyaml/filesys"
	"sigs.k8s.io/yaml"
)

// kubeDir is the kustomize tree, relative to this module.
const kubeDir = "kubernetes"

// kustomizations are the directories meant for kubectl apply -k (and the
// base they share).
var kustomizations = []string{"base", "overlays/dev", "overlays/production", "monitoring"}

// newObject returns an empty typed object for an apiVersion and kind, or
// nil for a kind these manifests do not use.
func newObject(apiVersion, kind string) any {
	switch apiVersion + "/" + kind {
	case "v1/Namespace":
		return &corev1.Namespace{}
	case "v1/Service":
		return &corev1.Service{}
	case "v1/ConfigMap":
		return &corev1.ConfigMap{}
	case "apps/v1/Deployment":
		return &appsv1.Deployment{}
	case "autoscaling/v2/HorizontalPodAutoscaler":
		return &autoscalingv2.HorizontalPodAutoscaler{}
	case "policy/v1/PodDisruptionBudget":
		return &policyv1.PodDisruptionBudget{}
	case "networking.k8s.io/v1/NetworkPolicy":
		return &networkingv1.NetworkPolicy{}
	case "monitoring.coreos.com/v1/ServiceMonitor":
		return &monitoringv1.ServiceMonitor{}
	case "monitoring.coreos.com/v1/PrometheusRule":
		return &monitoringv1.PrometheusRule{}
	case "kustomize.config.k8s.io/v1beta1/Kustomization":
		return &kustomizetypes.Kustomization{}
	}
	return nil
}

// splitYAML splits a multi-document YAML stream.
func splitYAML(b []byte) [][]byte {
	var docs [][]byte
	for _, d := range bytes.Split(append([]byte("\n"), b...), []byte("\n---")) {
		if len(bytes.TrimSpace(d)) > 0 {
			docs = append(docs, d)
		}
	}
	return docs
}

// decodeStrict decodes one YAML document into its Kubernetes type,
// rejecting unknown and duplicate fields.
func decodeStrict(doc []byte) (any, error) {
	var tm struct {
		APIVersion string `json:"apiVersion"`
		Kind       string `json:"kind"`
	}
	if err := yaml.Unmarshal(doc, &tm); err != nil {
		return nil, err
	}
	obj := newObject(tm.APIVersion, tm.Kind)
	if obj == nil {
		return nil, fmt.Errorf("apiVersion %q kind %q: not a type these checks know", tm.APIVersion, tm.Kind)
	}
	if err := yaml.UnmarshalStrict(doc, obj); err != nil {
		return nil, fmt.Errorf("%s %s: %w", tm.APIVersion, tm.Kind, err)
	}
	return obj, nil
}

// TestManifestsDecodeStrictly decodes every YAML file of the tree into the
// Kubernetes API types (k8s.io/api; the Prometheus Operator's own types for
// ServiceMonitor and PrometheusRule; kustomize's for kustomization.yaml;
// strategic-merge patch files as the kind they patch): an unknown or
// misspelt field anywhere is an error.
func TestManifestsDecodeStrictly(t *testing.T) {
	n := 0
	err := filepath.WalkDir(kubeDir, func(p string, de fs.DirEntry, err error) error {
		if err != nil || de.IsDir() || !strings.HasSuffix(p, ".yaml") {
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		for i, doc := range splitYAML(b) {
			if _, err := decodeStrict(doc); err != nil {
				t.Errorf("%s document %d: %v", p, i, err)
			}
			n++
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if n < 15 {
		t.Errorf("decoded only %d documents; is %s complete?", n, kubeDir)
	}
	// The strictness itself: a misspelt field must fail.
	if _, err := decodeStrict([]byte("apiVersion: apps/v1\nkind: Deployment\nspec:\n  replica: 2\n")); err == nil {
		t.Error("strict decoding accepted an unknown field")
	}
}

// built is the output of one kustomization, decoded strictly.
type built struct {
	dir  string
	objs []any
}

var (
	buildMu    sync.Mutex
	buildCache = map[string]*built{}
)

// buildKustomization runs kustomize (krusty, in-process, default options
// as kubectl apply -k uses them) on kubernetes/<dir> and decodes every
// resulting object strictly.
func buildKustomization(t testing.TB, dir string) *built {
	t.Helper()
	buildMu.Lock()
	defer buildMu.Unlock()
	if b, ok := buildCache[dir]; ok {
		return b
	}
	k := krusty.MakeKustomizer(krusty.MakeDefaultOptions())
	m, err := k.Run(filesys.MakeFsOnDisk(), filepath.Join(kubeDir, dir))
	if err != nil {
		t.Fatalf("kustomize build %s: %v", dir, err)
	}
	b := &built{dir: dir}
	for _, r := range m.Resources() {
		y, err := r.AsYAML()
		if err != nil {
			t.Fatal(err)
		}
		obj, err := decodeStrict(y)
		if err != nil {
			t.Fatalf("kustomize build %s: %s: %v", dir, r.CurId(), err)
		}
		b.objs = append(b.objs, obj)
	}
	buildCache[dir] = b
	return b
}

// all returns the objects of type T.
func all[T any](b *built) []*T {
	var out []*T
	for _, o := range b.objs {
		if v, ok := o.(*T); ok {
			out = append(out, v)
		}
	}
	return out
}

// one returns the single object of type T, failing otherwise.
func one[T any](t testing.TB, b *built) *T {
	t.Helper()
	v := all[T](b)
	if len(v) != 1 {
		t.Fatalf("%s: %d objects of type %T, want 1", b.dir, len(v), *new(T))
	}
	return v[0]
}

func deploymentOf(t testing.TB, b *built) *appsv1.Deployment { return one[appsv1.Deployment](t, b) }

// serverContainer is the kinchain container of the Deployment.
func serverContainer(t testing.TB, d *appsv1.Deployment) *corev1.Container {
	t.Helper()
	cs := d.Spec.Template.Spec.Containers
	if len(cs) != 1 || cs[0].Name != "kinchain" {
		t.Fatalf("Deployment %s: want exactly one container named kinchain", d.Name)
	}
	return &cs[0]
}

// configMap returns the ConfigMap called name in the build.
func configMap(t testing.TB, b *built, name string) *corev1.ConfigMap {
	t.Helper()
	for _, c := range all[corev1.ConfigMap](b) {
		if c.Name == name {
			return c
		}
	}
	t.Fatalf("%s: no ConfigMap %s", b.dir, name)
	return nil
}

// containerEnv resolves the container's environment as the kubelet does:
// envFrom ConfigMaps first, then env entries (literal values only).
func containerEnv(t testing.TB, b *built, c *corev1.Container) map[string]string {
	t.Helper()
	env := map[string]string{}
	for _, ef := range c.EnvFrom {
		if ef.ConfigMapRef == nil || ef.Prefix != "" {
			t.Fatalf("container %s: only envFrom configMapRef without prefix is expected", c.Name)
		}
		for k, v := range configMap(t, b, ef.ConfigMapRef.Name).Data {
			env[k] = v
		}
	}
	for _, e := range c.Env {
		if e.ValueFrom != nil {
			t.Fatalf("container %s: env %s uses valueFrom, which these checks cannot resolve", c.Name, e.Name)
		}
		env[e.Name] = e.Value
	}
	return env
}

// podLabels are the Deployment's pod template labels.
func podLabels(d *appsv1.Deployment) labels.Set { return labels.Set(d.Spec.Template.Labels) }

func TestKustomizationsBuild(t *testing.T) {
	for _, dir := range kustomizations {
		t.Run(strings.ReplaceAll(dir, "/", "_"), func(t *testing.T) {
			b := buildKustomization(t, dir)
			var kinds []string
			for _, o := range b.objs {
				kinds = append(kinds, fmt.Sprintf("%T", o))
			}
			sort.Strings(kinds)
			t.Logf("%s: %s", dir, strings.Join(kinds, ", "))
			if len(b.objs) == 0 {
				t.Fatal("no objects")
			}
		})
	}
}

// TestPodSecurity checks the pod against the restricted Pod Security
// Standard (Kubernetes documentation, "Pod Security Standards",
// Restricted profile) and the brief: non-root numeric user, read-only root
// filesystem, no privilege escalation, all capabilities dropped,
// RuntimeDefault seccomp, no service account token.
func TestPodSecurity(t *testing.T) {
	for _, dir := range []string{"base", "overlays/dev", "overlays/production"} {
		d := deploymentOf(t, buildKustomization(t, dir))
		ps := d.Spec.Template.Spec
		c := serverContainer(t, d)
		sc := c.SecurityContext
		if sc == nil || ps.SecurityContext == nil {
			t.Fatalf("%s: pod and container need a securityContext", dir)
		}
		check := func(ok bool, what string) {
			if !ok {
				t.Errorf("%s: %s", dir, what)
			}
		}
		check(ps.SecurityContext.RunAsNonRoot != nil && *ps.SecurityContext.RunAsNonRoot, "pod runAsNonRoot")
		check(sc.RunAsNonRoot != nil && *sc.RunAsNonRoot, "container runAsNonRoot")
		check(sc.RunAsUser != nil && *sc.RunAsUser > 0, "container runAsUser numeric, not 0")
		check(sc.ReadOnlyRootFilesystem != nil && *sc.ReadOnlyRootFilesystem, "readOnlyRootFilesystem")
		check(sc.AllowPrivilegeEscalation != nil && !*sc.AllowPrivilegeEscalation, "allowPrivilegeEscalation false")
		check(sc.Privileged == nil || !*sc.Privileged, "not privileged")
		check(sc.Capabilities != nil && len(sc.Capabilities.Drop) == 1 && sc.Capabilities.Drop[0] == "ALL" && len(sc.Capabilities.Add) == 0, "capabilities drop [ALL], add none")
		seccomp := sc.SeccompProfile
		if seccomp == nil {
			seccomp = ps.SecurityContext.SeccompProfile
		}
		check(seccomp != nil && seccomp.Type == corev1.SeccompProfileTypeRuntimeDefault, "seccompProfile RuntimeDefault")
		check(ps.AutomountServiceAccountToken != nil && !*ps.AutomountServiceAccountToken, "automountServiceAccountToken false (the server never calls the API)")
		check(!ps.HostNetwork && !ps.HostPID && !ps.HostIPC, "no host namespaces")
		for _, v := range ps.Volumes {
			check(v.HostPath == nil, "no hostPath volumes")
		}
		for _, m := range c.VolumeMounts {
			check(m.ReadOnly, "volume mount "+m.MountPath+" read-only")
		}
		// The image's USER is what the pod claims to run as.
		uid, gid := imageUser(t, readRepoDockerfile(t))
		check(sc.RunAsUser != nil && *sc.RunAsUser == uid, fmt.Sprintf("runAsUser = the Dockerfile's USER uid %d", uid))
		check(sc.RunAsGroup != nil && *sc.RunAsGroup == gid, fmt.Sprintf("runAsGroup = the Dockerfile's USER gid %d", gid))
	}
	for _, dir := range []string{"overlays/dev", "overlays/production"} {
		ns := one[corev1.Namespace](t, buildKustomization(t, dir))
		if ns.Labels["pod-security.kubernetes.io/enforce"] != "restricted" {
			t.Errorf("%s: namespace %s does not enforce the restricted Pod Security Standard", dir, ns.Name)
		}
		if d := deploymentOf(t, buildKustomization(t, dir)); d.Namespace != ns.Name {
			t.Errorf("%s: Deployment in namespace %q, the overlay's Namespace is %q", dir, d.Namespace, ns.Name)
		}
	}
}

// TestSelectorsAndReferences checks that every selector and reference
// within a build finds what it means: Services, the PodDisruptionBudget and
// the NetworkPolicy select the Deployment's pods; the Deployment's selector
// matches its template; the autoscaler targets the Deployment; envFrom and
// volumes name objects of the build (the TLS Secret excepted: it is made
// outside, see the README).
func TestSelectorsAndReferences(t *testing.T) {
	for _, dir := range []string{"base", "overlays/dev", "overlays/production"} {
		b := buildKustomization(t, dir)
		d := deploymentOf(t, b)
		pl := podLabels(d)
		if d.Spec.Selector == nil || !labels.SelectorFromSet(d.Spec.Selector.MatchLabels).Matches(pl) || len(d.Spec.Selector.MatchExpressions) > 0 {
			t.Errorf("%s: Deployment selector does not match its pod template", dir)
		}
		for _, s := range all[corev1.Service](b) {
			if len(s.Spec.Selector) == 0 || !labels.SelectorFromSet(s.Spec.Selector).Matches(pl) {
				t.Errorf("%s: Service %s does not select the kinchain pods", dir, s.Name)
			}
			if s.Namespace != d.Namespace {
				t.Errorf("%s: Service %s in namespace %q, Deployment in %q", dir, s.Name, s.Namespace, d.Namespace)
			}
		}
		for _, p := range all[policyv1.PodDisruptionBudget](b) {
			if p.Spec.Selector == nil || !labels.SelectorFromSet(p.Spec.Selector.MatchLabels).Matches(pl) {
				t.Errorf("%s: PodDisruptionBudget %s does not select the kinchain pods", dir, p.Name)
			}
		}
		for _, np := range all[networkingv1.NetworkPolicy](b) {
			if !labels.SelectorFromSet(np.Spec.PodSelector.MatchLabels).Matches(pl) {
				t.Errorf("%s: NetworkPolicy %s does not select the kinchain pods", dir, np.Name)
			}
		}
		for _, h := range all[autoscalingv2.HorizontalPodAutoscaler](b) {
			ref := h.Spec.ScaleTargetRef
			if ref.Kind != "Deployment" || ref.APIVersion != "apps/v1" || ref.Name != d.Name {
				t.Errorf("%s: autoscaler %s targets %s %s %s, want the Deployment %s", dir, h.Name, ref.APIVersion, ref.Kind, ref.Name, d.Name)
			}
		}
		c := serverContainer(t, d)
		_ = containerEnv(t, b, c) // fails when a ConfigMap is missing
		for _, v := range d.Spec.Template.Spec.Volumes {
			if v.Secret != nil && v.Secret.SecretName != "kinchain-tls" {
				t.Errorf("%s: volume %s uses Secret %s; only kinchain-tls is expected", dir, v.Name, v.Secret.SecretName)
			}
		}
		for _, tsc := range d.Spec.Template.Spec.TopologySpreadConstraints {
			if tsc.LabelSelector == nil || !labels.SelectorFromSet(tsc.LabelSelector.MatchLabels).Matches(pl) {
				t.Errorf("%s: topology spread on %s does not select the kinchain pods", dir, tsc.TopologyKey)
			}
		}
	}
}

// TestReplicasAndDisruption checks the overlays' shape: dev runs one
// replica without an autoscaler; production runs at least three, spread
// over zones; wherever an autoscaler owns the count the Deployment sets no
// replicas (an apply would reset the autoscaler's choice); the disruption
// budget always leaves a pod evictable and, in production, two serving.
func TestReplicasAndDisruption(t *testing.T) {
	for _, dir := range []string{"base", "overlays/dev", "overlays/production"} {
		b := buildKustomization(t, dir)
		d := deploymentOf(t, b)
		hpas := all[autoscalingv2.HorizontalPodAutoscaler](b)
		pdb := one[policyv1.PodDisruptionBudget](t, b)
		if pdb.Spec.MaxUnavailable == nil || pdb.Spec.MaxUnavailable.IntValue() != 1 || pdb.Spec.MinAvailable != nil {
			t.Errorf("%s: PodDisruptionBudget wants maxUnavailable 1 (evictable at any replica count)", dir)
		}
		minReplicas := int32(1)
		switch {
		case len(hpas) == 1:
			h := hpas[0]
			if d.Spec.Replicas != nil {
				t.Errorf("%s: Deployment sets replicas although autoscaler %s owns the count", dir, h.Name)
			}
			if h.Spec.MinReplicas == nil || *h.Spec.MinReplicas > h.Spec.MaxReplicas {
				t.Errorf("%s: autoscaler min/max replicas inconsistent", dir)
			} else {
				minReplicas = *h.Spec.MinReplicas
			}
			if len(h.Spec.Metrics) != 1 || h.Spec.Metrics[0].Resource == nil || h.Spec.Metrics[0].Resource.Name != corev1.ResourceCPU ||
				h.Spec.Metrics[0].Resource.Target.Type != autoscalingv2.UtilizationMetricType || h.Spec.Metrics[0].Resource.Target.AverageUtilization == nil {
				t.Errorf("%s: autoscaler must scale on CPU utilisation", dir)
			}
		case len(hpas) == 0:
			if d.Spec.Replicas == nil {
				t.Errorf("%s: no autoscaler and no replicas", dir)
			} else {
				minReplicas = *d.Spec.Replicas
			}
		default:
			t.Errorf("%s: %d autoscalers", dir, len(hpas))
		}
		switch dir {
		case "overlays/dev":
			if len(hpas) != 0 || minReplicas != 1 {
				t.Errorf("dev: want one replica and no autoscaler, got %d replicas, %d autoscalers", minReplicas, len(hpas))
			}
		case "overlays/production":
			if minReplicas < 3 {
				t.Errorf("production: at least 3 replicas, got %d", minReplicas)
			}
			zones := false
			for _, c := range d.Spec.Template.Spec.TopologySpreadConstraints {
				if c.TopologyKey == corev1.LabelTopologyZone && c.WhenUnsatisfiable == corev1.DoNotSchedule && c.MaxSkew == 1 {
					zones = true
				}
			}
			if !zones {
				t.Error("production: no hard topology spread over topology.kubernetes.io/zone")
			}
			if int(minReplicas)-pdb.Spec.MaxUnavailable.IntValue() < 2 {
				t.Error("production: a disruption may leave fewer than two pods")
			}
		}
		if s := d.Spec.Strategy.RollingUpdate; s == nil || s.MaxUnavailable == nil || s.MaxUnavailable.IntValue() != 0 {
			t.Errorf("%s: rolling update should keep every pod until its replacement is ready (maxUnavailable 0)", dir)
		}
	}
}

// TestProductionImage: production names an image by an explicit tag (or
// digest), never latest; dev uses the locally built image.
func TestProductionImage(t *testing.T) {
	img := serverContainer(t, deploymentOf(t, buildKustomization(t, "overlays/production"))).Image
	name, tag, hasTag := strings.Cut(img[strings.LastIndex(img, "/")+1:], ":")
	if !strings.Contains(img, "@sha256:") && (!hasTag || tag == "latest" || tag == "") {
		t.Errorf("production image %q: pin a version tag or digest", img)
	}
	if name != "kinchain" {
		t.Errorf("production image %q is not kinchain", img)
	}
}

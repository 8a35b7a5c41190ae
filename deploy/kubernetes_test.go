package deploy

import (
	"errors"
	"maps"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	appsv1 "k8s.io/api/apps/v1"
	autoscalingv2 "k8s.io/api/autoscaling/v2"
	corev1 "k8s.io/api/core/v1"
	networkingv1 "k8s.io/api/networking/v1"
	policyv1 "k8s.io/api/policy/v1"
	"k8s.io/apimachinery/pkg/api/resource"
	metav1 "k8s.io/apimachinery/pkg/apis/meta/v1"
	"k8s.io/apimachinery/pkg/labels"
	"k8s.io/apimachinery/pkg/util/intstr"
	sigsjson "sigs.k8s.io/json"
	"sigs.k8s.io/yaml"
)

var manifestDir = filepath.Join(repoRoot, "deploy", "kubernetes")

// manifests is every object in deploy/kubernetes, decoded strictly: a field
// the real Kubernetes type does not have (a typo, a wrong nesting) is an
// error, as the API server's strict field validation would make it.
type manifests struct {
	deployments  map[string]*appsv1.Deployment
	services     map[string]*corev1.Service
	configMaps   map[string]*corev1.ConfigMap
	hpas         map[string]*autoscalingv2.HorizontalPodAutoscaler
	pdbs         map[string]*policyv1.PodDisruptionBudget
	netpols      map[string]*networkingv1.NetworkPolicy
	kustomize    *kustomization
	objectFiles  []string // files holding API objects (not the kustomization)
	objectsCount int
}

// kustomization is the part of kustomize's file format this directory uses.
type kustomization struct {
	APIVersion string   `json:"apiVersion"`
	Kind       string   `json:"kind"`
	Resources  []string `json:"resources"`
	Images     []struct {
		Name    string `json:"name"`
		NewName string `json:"newName,omitempty"`
		NewTag  string `json:"newTag,omitempty"`
	} `json:"images"`
}

func loadManifests(t *testing.T) *manifests {
	t.Helper()
	files, err := filepath.Glob(filepath.Join(manifestDir, "*.yaml"))
	if err != nil || len(files) == 0 {
		t.Fatalf("no manifests in %s (%v)", manifestDir, err)
	}
	m := &manifests{
		deployments: map[string]*appsv1.Deployment{},
		services:    map[string]*corev1.Service{},
		configMaps:  map[string]*corev1.ConfigMap{},
		hpas:        map[string]*autoscalingv2.HorizontalPodAutoscaler{},
		pdbs:        map[string]*policyv1.PodDisruptionBudget{},
		netpols:     map[string]*networkingv1.NetworkPolicy{},
	}
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		if filepath.Base(f) == "kustomization.yaml" {
			m.kustomize = new(kustomization)
			if err := decodeStrict(b, m.kustomize); err != nil {
				t.Fatalf("%s: %v", f, err)
			}
			continue
		}
		m.objectFiles = append(m.objectFiles, filepath.Base(f))
		for i, doc := range splitYAML(b) {
			var tm metav1.TypeMeta
			if err := yaml.Unmarshal(doc, &tm); err != nil {
				t.Fatalf("%s document %d: %v", f, i, err)
			}
			var obj any
			var name func() string
			switch tm.APIVersion + " " + tm.Kind {
			case "apps/v1 Deployment":
				o := new(appsv1.Deployment)
				obj, name = o, func() string { m.deployments[o.Name] = o; return o.Name }
			case "v1 Service":
				o := new(corev1.Service)
				obj, name = o, func() string { m.services[o.Name] = o; return o.Name }
			case "v1 ConfigMap":
				o := new(corev1.ConfigMap)
				obj, name = o, func() string { m.configMaps[o.Name] = o; return o.Name }
			case "autoscaling/v2 HorizontalPodAutoscaler":
				o := new(autoscalingv2.HorizontalPodAutoscaler)
				obj, name = o, func() string { m.hpas[o.Name] = o; return o.Name }
			case "policy/v1 PodDisruptionBudget":
				o := new(policyv1.PodDisruptionBudget)
				obj, name = o, func() string { m.pdbs[o.Name] = o; return o.Name }
			case "networking.k8s.io/v1 NetworkPolicy":
				o := new(networkingv1.NetworkPolicy)
				obj, name = o, func() string { m.netpols[o.Name] = o; return o.Name }
			default:
				t.Fatalf("%s document %d: unexpected %s %s (add it to this test)", f, i, tm.APIVersion, tm.Kind)
			}
			if err := decodeStrict(doc, obj); err != nil {
				t.Fatalf("%s document %d (%s): %v", f, i, tm.Kind, err)
			}
			if n := name(); n == "" {
				t.Fatalf("%s document %d: %s without metadata.name", f, i, tm.Kind)
			}
			m.objectsCount++
		}
	}
	return m
}

// decodeStrict decodes one YAML document into obj as the API server's
// strict field validation would: field names are case-sensitive, and an
// unknown or duplicate field is an error. (sigs.k8s.io/yaml's own
// UnmarshalStrict goes through encoding/json, which matches names
// case-insensitively and so lets "readOnlyRootFileSystem" pass.)
func decodeStrict(doc []byte, obj any) error {
	j, err := yaml.YAMLToJSONStrict(doc)
	if err != nil {
		return err
	}
	strictErrs, err := sigsjson.UnmarshalStrict(j, obj)
	if err != nil {
		return err
	}
	return errors.Join(strictErrs...)
}

// splitYAML splits a multi-document YAML file on "---" lines, dropping
// empty documents.
func splitYAML(b []byte) [][]byte {
	var docs [][]byte
	for _, d := range regexp.MustCompile(`(?m)^---\s*$`).Split(string(b), -1) {
		if strings.TrimSpace(stripComments(d)) != "" {
			docs = append(docs, []byte(d))
		}
	}
	return docs
}

// server returns the modegridd Deployment and its container.
func (m *manifests) server(t *testing.T) (*appsv1.Deployment, *corev1.Container) {
	t.Helper()
	d, ok := m.deployments["modegrid"]
	if !ok {
		t.Fatal("no Deployment named modegrid")
	}
	for i := range d.Spec.Template.Spec.Containers {
		if c := &d.Spec.Template.Spec.Containers[i]; c.Name == "modegridd" {
			return d, c
		}
	}
	t.Fatal("Deployment modegrid has no container modegridd")
	return nil, nil
}

// TestManifestsDecode: every file decodes strictly into the Kubernetes
// types, and the kustomization lists exactly the files there are.
func TestManifestsDecode(t *testing.T) {
	m := loadManifests(t)
	if m.kustomize == nil {
		t.Fatal("no kustomization.yaml")
	}
	got := slices.Sorted(slices.Values(m.kustomize.Resources))
	want := slices.Sorted(slices.Values(m.objectFiles))
	if !slices.Equal(got, want) {
		t.Errorf("kustomization resources %v; want every manifest file %v", got, want)
	}
	if m.objectsCount < 9 {
		t.Errorf("decoded %d objects; want at least 9 (ConfigMap, 2 Deployments, 3 Services, HPA, PDB, 2 NetworkPolicies)", m.objectsCount)
	}
}

// healthPort is the plaintext health-only port the kubelet probes.
const healthPort = 7421

// TestDeployment checks the modegridd Deployment: two replicas, gRPC
// readiness and liveness probes on the standard health service, resource
// requests and limits, non-root with a read-only root filesystem, a grace
// period longer than the server's own plus the preStop pause, and
// configuration through MODEGRID_* environment variables.
func TestDeployment(t *testing.T) {
	m := loadManifests(t)
	d, c := m.server(t)
	pod := d.Spec.Template.Spec

	t.Run("replicas and selector", func(t *testing.T) {
		if d.Spec.Replicas == nil || *d.Spec.Replicas != 2 {
			t.Errorf("replicas = %v; want 2", d.Spec.Replicas)
		}
		sel, err := metav1.LabelSelectorAsSelector(d.Spec.Selector)
		if err != nil {
			t.Fatal(err)
		}
		if !sel.Matches(labels.Set(d.Spec.Template.Labels)) {
			t.Errorf("selector %v does not match the pod labels %v", sel, d.Spec.Template.Labels)
		}
		if ru := d.Spec.Strategy.RollingUpdate; ru == nil || ru.MaxUnavailable == nil || ru.MaxUnavailable.IntValue() != 0 {
			t.Errorf("rolling update %+v; want maxUnavailable 0 so a rollout never drops capacity", ru)
		}
	})

	t.Run("ports match the image", func(t *testing.T) {
		// grpc and metrics are the Dockerfile's EXPOSE; health is the
		// ConfigMap's MODEGRID_HEALTH_LISTEN (checked in "configuration").
		want := map[string]int32{"grpc": 7420, "metrics": 9420, "health": healthPort}
		got := map[string]int32{}
		for _, p := range c.Ports {
			got[p.Name] = p.ContainerPort
		}
		if !maps.Equal(got, want) {
			t.Errorf("container ports %v; want %v (the Dockerfile's EXPOSE)", got, want)
		}
	})

	t.Run("probes", func(t *testing.T) {
		tests := []struct {
			name    string
			probe   *corev1.Probe
			service string
		}{
			{name: "readiness", probe: c.ReadinessProbe, service: serviceName},
			{name: "liveness", probe: c.LivenessProbe, service: ""},
			{name: "startup", probe: c.StartupProbe, service: ""},
		}
		for _, tc := range tests {
			t.Run(tc.name, func(t *testing.T) {
				if tc.probe == nil || tc.probe.GRPC == nil {
					t.Fatalf("%s probe %+v; want a native gRPC probe", tc.name, tc.probe)
				}
				if tc.probe.GRPC.Port != healthPort {
					t.Errorf("probe port %d; want the plaintext health port %d (the kubelet's gRPC probes take no TLS)", tc.probe.GRPC.Port, healthPort)
				}
				got := ""
				if tc.probe.GRPC.Service != nil {
					got = *tc.probe.GRPC.Service
				}
				if got != tc.service {
					t.Errorf("probe service %q; want %q", got, tc.service)
				}
			})
		}
		if c.TerminationMessagePolicy != corev1.TerminationMessageFallbackToLogsOnError {
			t.Errorf("terminationMessagePolicy %q; want FallbackToLogsOnError (a crash's last log lines in the pod status)", c.TerminationMessagePolicy)
		}
		// Liveness must not be stricter than readiness: a busy replica should
		// leave the endpoints before it is restarted.
		if r, l := c.ReadinessProbe, c.LivenessProbe; r != nil && l != nil &&
			l.PeriodSeconds*l.FailureThreshold <= r.PeriodSeconds*r.FailureThreshold {
			t.Errorf("liveness gives up after %d s, readiness after %d s; liveness should be the more patient",
				l.PeriodSeconds*l.FailureThreshold, r.PeriodSeconds*r.FailureThreshold)
		}
	})

	t.Run("resources", func(t *testing.T) {
		for _, name := range []corev1.ResourceName{corev1.ResourceCPU, corev1.ResourceMemory} {
			req, okReq := c.Resources.Requests[name]
			lim, okLim := c.Resources.Limits[name]
			if !okReq || !okLim {
				t.Errorf("%s: request set %v, limit set %v; want both", name, okReq, okLim)
				continue
			}
			if req.Cmp(lim) > 0 {
				t.Errorf("%s request %s above limit %s", name, req.String(), lim.String())
			}
		}
		memReq, memLim := c.Resources.Requests[corev1.ResourceMemory], c.Resources.Limits[corev1.ResourceMemory]
		if memReq.Cmp(memLim) != 0 {
			t.Errorf("memory request %s ≠ limit %s; want equal, so the node never overcommits the cache's memory", memReq.String(), memLim.String())
		}
		gml := envValue(c, "GOMEMLIMIT")
		q, err := resource.ParseQuantity(strings.TrimSuffix(gml, "B"))
		if err != nil {
			t.Fatalf("GOMEMLIMIT %q: %v", gml, err)
		}
		if q.Cmp(memLim) >= 0 || q.Value() < memLim.Value()*3/4 {
			t.Errorf("GOMEMLIMIT %s; want between 75%% and 100%% of the memory limit %s", gml, memLim.String())
		}
		// OpenBLAS would size its thread pool from the node's CPUs.
		cpuLim := c.Resources.Limits[corev1.ResourceCPU]
		if obt, want := envValue(c, "OPENBLAS_NUM_THREADS"), strconv.FormatInt(cpuLim.Value(), 10); obt != want {
			t.Errorf("OPENBLAS_NUM_THREADS %q; want the CPU limit, %s", obt, want)
		}
	})

	t.Run("security", func(t *testing.T) {
		ps, cs := pod.SecurityContext, c.SecurityContext
		if ps == nil || cs == nil {
			t.Fatal("pod or container securityContext missing")
		}
		if ps.RunAsNonRoot == nil || !*ps.RunAsNonRoot {
			t.Error("pod runAsNonRoot not true")
		}
		if ps.RunAsUser == nil || *ps.RunAsUser != 65532 {
			t.Errorf("pod runAsUser %v; want 65532 (distroless nonroot)", ps.RunAsUser)
		}
		if cs.ReadOnlyRootFilesystem == nil || !*cs.ReadOnlyRootFilesystem {
			t.Error("container readOnlyRootFilesystem not true")
		}
		if cs.AllowPrivilegeEscalation == nil || *cs.AllowPrivilegeEscalation {
			t.Error("container allowPrivilegeEscalation not false")
		}
		if cs.Capabilities == nil || !slices.Contains(cs.Capabilities.Drop, "ALL") {
			t.Error("container does not drop ALL capabilities")
		}
		if pod.AutomountServiceAccountToken == nil || *pod.AutomountServiceAccountToken {
			t.Error("service account token mounted; modegridd does not talk to the API server")
		}
		// The one volume is the Redis password Secret, read-only.
		if len(pod.Volumes) != 1 || pod.Volumes[0].Secret == nil || len(c.VolumeMounts) != 1 || !c.VolumeMounts[0].ReadOnly {
			t.Errorf("volumes %v, mounts %v; want only the Redis password Secret, mounted read-only", pod.Volumes, c.VolumeMounts)
		}
	})

	t.Run("graceful termination", func(t *testing.T) {
		// The server's stop sequence (server/cmd/modegridd): health
		// NOT_SERVING, calls still accepted for drain-delay, then
		// shutdown-grace for calls in flight. Values from the ConfigMap, else
		// the binary's defaults.
		cm := m.configMaps[envFromConfigMap(t, c)]
		stop := int64(0)
		for _, f := range []string{"drain-delay", "shutdown-grace"} {
			v, ok := cm.Data[envName(f)]
			if !ok {
				v = flagDefault(t, f)
			}
			secs, err := parseDurationSeconds(v)
			if err != nil {
				t.Fatalf("%s %q: %v", f, v, err)
			}
			stop += secs
		}
		if v := cm.Data[envName("drain-delay")]; v == "" || v == "0s" {
			t.Error("no MODEGRID_DRAIN_DELAY: endpoints may still route to a stopping pod")
		}
		tg := pod.TerminationGracePeriodSeconds
		if tg == nil || *tg <= stop {
			t.Errorf("terminationGracePeriodSeconds %v; want > drain-delay + shutdown-grace = %d s", tg, stop)
		}
	})

	t.Run("configuration through env", func(t *testing.T) {
		if len(c.Args) != 0 || len(c.Command) != 0 {
			t.Errorf("command %v args %v; configure through env only", c.Command, c.Args)
		}
		cm := m.configMaps[envFromConfigMap(t, c)]
		flags := daemonFlags(t)
		for k, v := range cm.Data {
			if !strings.HasPrefix(k, "MODEGRID_") {
				t.Errorf("ConfigMap key %s: want MODEGRID_* names", k)
				continue
			}
			flag := strings.ReplaceAll(strings.ToLower(strings.TrimPrefix(k, "MODEGRID_")), "_", "-")
			if !slices.Contains(flags, flag) {
				t.Errorf("ConfigMap key %s=%q: modegridd has no flag -%s (flags %v)", k, v, flag, flags)
			}
		}
		for key, port := range map[string]string{"MODEGRID_LISTEN": "7420", "MODEGRID_METRICS_LISTEN": "9420", "MODEGRID_HEALTH_LISTEN": strconv.Itoa(healthPort)} {
			if _, p, err := splitHostPort(cm.Data[key]); err != nil || p != port {
				t.Errorf("ConfigMap %s=%q; want port %s to match the container port", key, cm.Data[key], port)
			}
		}
		if addr, ok := cm.Data["MODEGRID_REDIS_ADDR"]; ok {
			host, port, err := splitHostPort(addr)
			svc, found := m.services[host]
			if err != nil || !found || len(svc.Spec.Ports) == 0 || strconv.Itoa(int(svc.Spec.Ports[0].Port)) != port {
				t.Errorf("MODEGRID_REDIS_ADDR=%q does not name a Service and its port", addr)
			}
		}
	})

	t.Run("image", func(t *testing.T) {
		if m.kustomize == nil || len(m.kustomize.Images) != 1 {
			t.Fatal("kustomization should set exactly one image")
		}
		name, _, _ := strings.Cut(c.Image, ":")
		if m.kustomize.Images[0].Name != name {
			t.Errorf("kustomization image %q does not match the container image %q", m.kustomize.Images[0].Name, c.Image)
		}
	})
}

func envValue(c *corev1.Container, name string) string {
	for _, e := range c.Env {
		if e.Name == name {
			return e.Value
		}
	}
	return ""
}

// daemonFlags returns the flag names modegridd accepts, from its -help.
func daemonFlags(t *testing.T) []string {
	t.Helper()
	out, _ := exec.Command(daemonBinary(t), "-help").CombinedOutput()
	var flags []string
	for _, m := range regexp.MustCompile(`(?m)^\s+-([a-z0-9-]+)`).FindAllSubmatch(out, -1) {
		flags = append(flags, string(m[1]))
	}
	if len(flags) == 0 {
		t.Fatalf("no flags found in modegridd -help:\n%s", out)
	}
	return flags
}

// envFromConfigMap returns the one ConfigMap the container takes its
// environment from, failing unless the manifests define it.
func envFromConfigMap(t *testing.T, c *corev1.Container) string {
	t.Helper()
	var cms []string
	for _, ef := range c.EnvFrom {
		if ef.ConfigMapRef != nil {
			cms = append(cms, ef.ConfigMapRef.Name)
		}
	}
	if len(cms) != 1 {
		t.Fatalf("envFrom ConfigMaps %v; want one", cms)
	}
	if _, ok := loadManifests(t).configMaps[cms[0]]; !ok {
		t.Fatalf("envFrom names ConfigMap %q, which no manifest defines", cms[0])
	}
	return cms[0]
}

// envName is modegridd's environment variable for a flag.
func envName(flag string) string {
	return "MODEGRID_" + strings.ToUpper(strings.ReplaceAll(flag, "-", "_"))
}

// flagDefault returns the default of a modegridd flag as -help prints it
// (the flag package prints "  -name type" and then the usage line ending
// "(default VALUE)"; a zero default is not printed and reads as "0s").
func flagDefault(t *testing.T, name string) string {
	t.Helper()
	out, _ := exec.Command(daemonBinary(t), "-help").CombinedOutput()
	m := regexp.MustCompile(`(?m)^\s+-` + regexp.QuoteMeta(name) + `\b[^\n]*\n([^\n]*)`).FindSubmatch(out)
	if m == nil {
		t.Fatalf("no flag -%s in modegridd -help:\n%s", name, out)
	}
	if d := regexp.MustCompile(`\(default ([^)]+)\)`).FindSubmatch(m[1]); d != nil {
		return string(d[1])
	}
	return "0s"
}

// parseDurationSeconds parses a Go duration and rounds it up to seconds.
func parseDurationSeconds(s string) (int64, error) {
	d, err := time.ParseDuration(s)
	if err != nil {
		return 0, err
	}
	return int64((d + time.Second - 1) / time.Second), nil
}

// TestServices: a headless Service for client-side balancing and a
// ClusterIP one, both selecting exactly the modegridd pods (not Redis), with
// target ports that name container ports.
func TestServices(t *testing.T) {
	m := loadManifests(t)
	d, c := m.server(t)
	podLabels := labels.Set(d.Spec.Template.Labels)
	portNames := map[string]int32{}
	for _, p := range c.Ports {
		portNames[p.Name] = p.ContainerPort
	}
	tests := []struct {
		name     string
		headless bool
	}{
		{name: "modegrid-headless", headless: true},
		{name: "modegrid", headless: false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			s, ok := m.services[tc.name]
			if !ok {
				t.Fatalf("no Service %s", tc.name)
			}
			if got := s.Spec.ClusterIP == corev1.ClusterIPNone; got != tc.headless {
				t.Errorf("headless = %v; want %v", got, tc.headless)
			}
			if !tc.headless && s.Spec.Type != corev1.ServiceTypeClusterIP && s.Spec.Type != "" {
				t.Errorf("type %s; want ClusterIP", s.Spec.Type)
			}
			if !labels.SelectorFromSet(s.Spec.Selector).Matches(podLabels) {
				t.Errorf("selector %v does not select the modegridd pods %v", s.Spec.Selector, podLabels)
			}
			for name, other := range m.deployments {
				if name != d.Name && labels.SelectorFromSet(s.Spec.Selector).Matches(labels.Set(other.Spec.Template.Labels)) {
					t.Errorf("selector %v also selects the pods of Deployment %s", s.Spec.Selector, name)
				}
			}
			var hasGRPC bool
			for _, p := range s.Spec.Ports {
				if _, ok := portNames[p.TargetPort.String()]; !ok {
					t.Errorf("port %s targets %q, not a container port name %v", p.Name, p.TargetPort.String(), portNames)
				}
				hasGRPC = hasGRPC || (p.Name == "grpc" && p.Port == 7420)
			}
			if !hasGRPC {
				t.Error("no grpc port 7420")
			}
		})
	}
}

// TestAutoscalingAndDisruption: the HPA scales the Deployment on CPU
// utilisation from its replica count up; the PDB keeps at least one pod
// through voluntary disruptions yet lets a node drain.
func TestAutoscalingAndDisruption(t *testing.T) {
	m := loadManifests(t)
	d, _ := m.server(t)
	t.Run("hpa", func(t *testing.T) {
		h, ok := m.hpas["modegrid"]
		if !ok {
			t.Fatal("no HorizontalPodAutoscaler modegrid")
		}
		ref := h.Spec.ScaleTargetRef
		if ref.Kind != "Deployment" || ref.Name != d.Name || ref.APIVersion != "apps/v1" {
			t.Errorf("scaleTargetRef %+v; want apps/v1 Deployment %s", ref, d.Name)
		}
		if h.Spec.MinReplicas == nil || *h.Spec.MinReplicas != *d.Spec.Replicas {
			t.Errorf("minReplicas %v; want the Deployment's %d", h.Spec.MinReplicas, *d.Spec.Replicas)
		}
		if h.Spec.MaxReplicas <= *d.Spec.Replicas {
			t.Errorf("maxReplicas %d; want more than %d", h.Spec.MaxReplicas, *d.Spec.Replicas)
		}
		if len(h.Spec.Metrics) != 1 {
			t.Fatalf("%d metrics; want one (CPU)", len(h.Spec.Metrics))
		}
		r := h.Spec.Metrics[0].Resource
		if r == nil || r.Name != corev1.ResourceCPU || r.Target.Type != autoscalingv2.UtilizationMetricType ||
			r.Target.AverageUtilization == nil || *r.Target.AverageUtilization < 50 || *r.Target.AverageUtilization > 90 {
			t.Errorf("metric %+v; want CPU average utilisation between 50 and 90 %%", h.Spec.Metrics[0])
		}
	})
	t.Run("pdb", func(t *testing.T) {
		p, ok := m.pdbs["modegrid"]
		if !ok {
			t.Fatal("no PodDisruptionBudget modegrid")
		}
		sel, err := metav1.LabelSelectorAsSelector(p.Spec.Selector)
		if err != nil {
			t.Fatal(err)
		}
		if !sel.Matches(labels.Set(d.Spec.Template.Labels)) {
			t.Errorf("selector %v does not select the modegridd pods", sel)
		}
		// One pod at a time, at every replica count the autoscaler
		// allows: maxUnavailable 1 (minAvailable would have to follow the
		// replica count; a minAvailable of 1 lets 9 of 10 go at once).
		if p.Spec.MinAvailable != nil {
			t.Errorf("minAvailable %v; want maxUnavailable only", p.Spec.MinAvailable)
		}
		if mu := p.Spec.MaxUnavailable; mu == nil || mu.Type != intstr.Int || mu.IntValue() != 1 {
			t.Errorf("maxUnavailable %v; want 1 (one pod evicted at a time; 0 would block drains)", mu)
		}
	})
}

// TestRedisManifest: the optional Redis is a cache: no persistence, an LRU
// eviction policy under a memory cap that fits its container limit, run as
// non-root with a read-only root filesystem.
func TestRedisManifest(t *testing.T) {
	m := loadManifests(t)
	d, ok := m.deployments["modegrid-redis"]
	if !ok {
		t.Fatal("no Deployment modegrid-redis")
	}
	c := d.Spec.Template.Spec.Containers[0]
	args := strings.Join(c.Args, " ")
	for _, want := range []string{"--save  ", "--appendonly no", "--maxmemory-policy allkeys-lru"} {
		if !strings.Contains(args+" ", want) {
			t.Errorf("redis args %q lack %q", args, strings.TrimSpace(want))
		}
	}
	i := slices.Index(c.Args, "--maxmemory")
	if i < 0 || i+1 >= len(c.Args) {
		t.Fatal("no --maxmemory")
	}
	maxmem, err := resource.ParseQuantity(strings.TrimSuffix(strings.ToUpper(c.Args[i+1]), "B") + "i")
	if err != nil {
		t.Fatalf("--maxmemory %q: %v", c.Args[i+1], err)
	}
	lim := c.Resources.Limits[corev1.ResourceMemory]
	if maxmem.Cmp(lim) >= 0 || maxmem.Value() > lim.Value()*9/10 {
		t.Errorf("--maxmemory %s; want at most 90%% of the container limit %s (Redis needs headroom)", c.Args[i+1], lim.String())
	}
	cs := c.SecurityContext
	if cs == nil || cs.ReadOnlyRootFilesystem == nil || !*cs.ReadOnlyRootFilesystem || d.Spec.Template.Spec.SecurityContext.RunAsNonRoot == nil {
		t.Error("redis container should run non-root with a read-only root filesystem")
	}
	if _, ok := m.services["modegrid-redis"]; !ok {
		t.Error("no Service modegrid-redis")
	}
}

func TestParseDurationSeconds(t *testing.T) {
	tests := []struct {
		name string
		in   string
		want int64
	}{
		{name: "seconds", in: "20s", want: 20},
		{name: "minutes and seconds", in: "1m30s", want: 90},
		{name: "fraction rounds up", in: "2.5s", want: 3},
		{name: "milliseconds", in: "500ms", want: 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := parseDurationSeconds(tc.in)
			if err != nil || got != tc.want {
				t.Errorf("parseDurationSeconds(%q) = %d, %v; want %d", tc.in, got, err, tc.want)
			}
		})
	}
}

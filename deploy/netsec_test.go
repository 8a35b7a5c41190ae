package deploy

import (
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/redis/go-redis/v9"
	appsv1 "k8s.io/api/apps/v1"
	corev1 "k8s.io/api/core/v1"
	networkingv1 "k8s.io/api/networking/v1"
	metav1 "k8s.io/apimachinery/pkg/apis/meta/v1"
	"k8s.io/apimachinery/pkg/labels"
)

// redisSecret is the Secret holding the Redis password, made by hand
// (OPERATIONS.md) and never part of the manifests.
const (
	redisSecret    = "modegrid-redis"
	redisSecretKey = "password"
)

// secretFile returns the path at which container c of pod sees key of
// Secret name, or "" when it is not mounted (read-only) there.
func secretFile(pod corev1.PodSpec, c *corev1.Container, name, key string) string {
	for _, v := range pod.Volumes {
		if v.Secret == nil || v.Secret.SecretName != name {
			continue
		}
		rel := key
		if len(v.Secret.Items) > 0 {
			rel = ""
			for _, it := range v.Secret.Items {
				if it.Key == key {
					rel = it.Path
				}
			}
		}
		for _, vm := range c.VolumeMounts {
			if vm.Name == v.Name && vm.ReadOnly && rel != "" {
				return filepath.Join(vm.MountPath, rel)
			}
		}
	}
	return ""
}

// TestRedisPasswordFromSecret: Redis requires a password that it reads
// from the Secret modegrid-redis; modegridd reads the same key of the same
// Secret through MODEGRID_REDIS_PASSWORD_FILE; no manifest holds a
// password, and the way to create the Secret is documented.
func TestRedisPasswordFromSecret(t *testing.T) {
	m := loadManifests(t)
	rd, ok := m.deployments["modegrid-redis"]
	if !ok {
		t.Fatal("no Deployment modegrid-redis")
	}
	rc := &rd.Spec.Template.Spec.Containers[0]
	t.Run("redis requires it", func(t *testing.T) {
		file := secretFile(rd.Spec.Template.Spec, rc, redisSecret, redisSecretKey)
		if file == "" {
			t.Fatalf("redis does not mount key %q of Secret %s read-only", redisSecretKey, redisSecret)
		}
		script := strings.Join(rc.Command, "\n")
		if want := "requirepass $(cat " + file + ")"; !strings.Contains(script, want) {
			t.Errorf("redis command %q does not set %q", script, want)
		}
		if strings.Contains(strings.Join(rc.Args, " "), "requirepass") {
			t.Error("requirepass among the arguments: the password would show in the process list")
		}
	})
	t.Run("modegridd reads it", func(t *testing.T) {
		d, c := m.server(t)
		file := secretFile(d.Spec.Template.Spec, c, redisSecret, redisSecretKey)
		if file == "" {
			t.Fatalf("modegridd does not mount key %q of Secret %s read-only", redisSecretKey, redisSecret)
		}
		cm := m.configMaps[envFromConfigMap(t, c)]
		if got := cm.Data["MODEGRID_REDIS_PASSWORD_FILE"]; got != file {
			t.Errorf("MODEGRID_REDIS_PASSWORD_FILE=%q; want the mounted secret %s", got, file)
		}
		for _, v := range d.Spec.Template.Spec.Volumes {
			if v.Secret != nil && (v.Secret.DefaultMode == nil || *v.Secret.DefaultMode&0o007 != 0) {
				t.Errorf("secret volume %s mode %v; want no access for others", v.Name, v.Secret.DefaultMode)
			}
		}
		if fs := d.Spec.Template.Spec.SecurityContext.FSGroup; fs == nil || *fs != *d.Spec.Template.Spec.SecurityContext.RunAsGroup {
			t.Errorf("fsGroup %v; want the pod's group, so the group-readable secret file is readable", fs)
		}
	})
	t.Run("no password in the manifests", func(t *testing.T) {
		for _, cm := range m.configMaps {
			if _, ok := cm.Data["MODEGRID_REDIS_PASSWORD"]; ok {
				t.Errorf("ConfigMap %s holds MODEGRID_REDIS_PASSWORD", cm.Name)
			}
		}
		for _, d := range m.deployments {
			for _, c := range d.Spec.Template.Spec.Containers {
				for _, e := range c.Env {
					if strings.Contains(strings.ToUpper(e.Name), "PASSWORD") && e.Value != "" {
						t.Errorf("%s/%s: env %s has a literal value", d.Name, c.Name, e.Name)
					}
				}
			}
		}
		// loadManifests refuses unknown kinds, so a Secret object would have
		// failed already; a generator in the kustomization is checked here.
		b, err := os.ReadFile(filepath.Join(manifestDir, "kustomization.yaml"))
		if err != nil {
			t.Fatal(err)
		}
		if strings.Contains(stripComments(string(b)), "secretGenerator") {
			t.Error("kustomization generates a Secret; the password must be created outside the repository")
		}
	})
	t.Run("documented", func(t *testing.T) {
		ops, err := os.ReadFile(filepath.Join(repoRoot, "deploy", "OPERATIONS.md"))
		if err != nil {
			t.Fatal(err)
		}
		if want := "kubectl create secret generic " + redisSecret; !strings.Contains(string(ops), want) {
			t.Errorf("OPERATIONS.md does not say how to create the Secret (%q)", want)
		}
	})
}

// TestRedisCommandRequiresPassword runs the Redis container's own command
// from redis.yaml with the real redis-server: the password file's content
// becomes requirepass, so a client without it is refused (NOAUTH) and one
// with it is served, and the password is not on redis-server's command
// line.
func TestRedisCommandRequiresPassword(t *testing.T) {
	if _, err := os.Stat(redisServerPath); err != nil {
		t.Skipf("redis-server not installed (%v): apt-get install redis-server", err)
	}
	m := loadManifests(t)
	rd := m.deployments["modegrid-redis"]
	rc := &rd.Spec.Template.Spec.Containers[0]
	if len(rc.Command) < 3 || rc.Command[0] != "/bin/sh" || rc.Command[1] != "-c" {
		t.Fatalf("command %q; want /bin/sh -c <script> …", rc.Command)
	}
	const password = "0f1e2d3c4b5a69788796a5b4c3d2e1f0"
	dir := t.TempDir()
	pwFile := filepath.Join(dir, "password")
	if err := os.WriteFile(pwFile, []byte(password+"\n"), 0o400); err != nil {
		t.Fatal(err)
	}
	mounted := secretFile(rd.Spec.Template.Spec, rc, redisSecret, redisSecretKey)
	script := strings.ReplaceAll(rc.Command[2], mounted, pwFile)
	addr := freeAddr(t)
	_, port, _ := splitHostPort(addr)
	// The manifest's arguments, then this test's port, address and directory.
	args := append(append([]string{"-c", script}, rc.Command[3:]...), rc.Args...)
	args = append(args, "--port", port, "--bind", "127.0.0.1", "--dir", dir, "--daemonize", "no")
	cmd := exec.Command("/bin/sh", args...)
	cmd.Env = []string{"PATH=" + filepath.Dir(redisServerPath)}
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { cmd.Process.Kill(); cmd.Wait() })
	if err := waitForLine(out, "Ready to accept connections", 10*time.Second); err != nil {
		t.Fatalf("redis from the manifest's command: %v", err)
	}
	ctx := testContext(t, 10*time.Second)
	for _, tc := range []struct {
		name, password, wantErr string
	}{
		{name: "no password", wantErr: "NOAUTH"},
		{name: "wrong password", password: "x" + password, wantErr: "WRONGPASS"},
		{name: "the Secret's password", password: password},
	} {
		c := redis.NewClient(&redis.Options{Addr: addr, Password: tc.password, DisableIdentity: true})
		err := c.Ping(ctx).Err()
		c.Close()
		if (tc.wantErr == "") != (err == nil) || (err != nil && !strings.Contains(err.Error(), tc.wantErr)) {
			t.Errorf("%s: PING error %v; want %q", tc.name, err, tc.wantErr)
		}
	}
	// The process exec'd into redis-server: its command line has no password.
	cmdline, err := os.ReadFile("/proc/" + strconv.Itoa(cmd.Process.Pid) + "/cmdline")
	if err != nil {
		t.Fatal(err)
	}
	if strings.Contains(string(cmdline), password) {
		t.Errorf("redis-server's command line holds the password: %q", cmdline)
	}
	exe, err := os.Readlink("/proc/" + strconv.Itoa(cmd.Process.Pid) + "/exe")
	if err != nil {
		t.Fatal(err)
	}
	if want, _ := filepath.EvalSymlinks(redisServerPath); exe != want {
		t.Errorf("the container's process runs %s; want redis-server itself (exec), so it gets the kubelet's signals", exe)
	}
}

// peer is a connecting pod: its namespace's labels and its own.
type peer struct {
	sameNamespace bool
	nsLabels      map[string]string
	podLabels     map[string]string
}

// admits reports whether the NetworkPolicies in force let from reach
// port (a container port name) of the pods of target. A pod no policy
// selects admits everything; a selected pod admits what one rule of one of
// its policies allows.
func admits(t *testing.T, pols map[string]*networkingv1.NetworkPolicy, target *appsv1.Deployment, port string, from peer) bool {
	t.Helper()
	podLabels := labels.Set(target.Spec.Template.Labels)
	number := int32(0)
	for _, c := range target.Spec.Template.Spec.Containers {
		for _, p := range c.Ports {
			if p.Name == port {
				number = p.ContainerPort
			}
		}
	}
	selected := false
	for _, p := range pols {
		sel, err := metav1.LabelSelectorAsSelector(&p.Spec.PodSelector)
		if err != nil {
			t.Fatal(err)
		}
		if !sel.Matches(podLabels) {
			continue
		}
		selected = true
		for _, r := range p.Spec.Ingress {
			if portMatches(r.Ports, port, number) && peerMatches(t, r.From, from) {
				return true
			}
		}
	}
	return !selected
}

func portMatches(ports []networkingv1.NetworkPolicyPort, name string, number int32) bool {
	if len(ports) == 0 {
		return true
	}
	for _, p := range ports {
		if p.Port == nil || p.Port.String() == name || p.Port.IntValue() == int(number) {
			return true
		}
	}
	return false
}

func peerMatches(t *testing.T, peers []networkingv1.NetworkPolicyPeer, from peer) bool {
	t.Helper()
	if len(peers) == 0 {
		return true
	}
	matches := func(s *metav1.LabelSelector, set map[string]string) bool {
		sel, err := metav1.LabelSelectorAsSelector(s)
		if err != nil {
			t.Fatal(err)
		}
		return sel.Matches(labels.Set(set))
	}
	for _, p := range peers {
		switch {
		case p.IPBlock != nil:
			continue // addresses: none of the peers below is given by address
		case p.NamespaceSelector == nil:
			if from.sameNamespace && matches(p.PodSelector, from.podLabels) {
				return true
			}
		case matches(p.NamespaceSelector, from.nsLabels) && (p.PodSelector == nil || matches(p.PodSelector, from.podLabels)):
			return true
		}
	}
	return false
}

// TestNetworkPolicies evaluates the policies for the connections that
// matter: only modegridd reaches Redis; anyone reaches the gRPC port; only
// the monitoring namespace reaches the metrics port.
func TestNetworkPolicies(t *testing.T) {
	m := loadManifests(t)
	server, _ := m.server(t)
	cache := m.deployments["modegrid-redis"]
	ns := func(name string) map[string]string { return map[string]string{"kubernetes.io/metadata.name": name} }
	app := ns("modegrid-prod")
	serverPod := peer{sameNamespace: true, nsLabels: app, podLabels: server.Spec.Template.Labels}
	otherPod := peer{sameNamespace: true, nsLabels: app, podLabels: map[string]string{"app.kubernetes.io/name": "debug-shell"}}
	prometheus := peer{nsLabels: ns("monitoring"), podLabels: map[string]string{"app.kubernetes.io/name": "prometheus"}}
	client := peer{nsLabels: ns("lab-clients"), podLabels: map[string]string{"app": "notebook"}}
	// A pod elsewhere that copies modegridd's labels: labels alone do not admit it.
	impostor := peer{nsLabels: ns("lab-clients"), podLabels: server.Spec.Template.Labels}
	tests := []struct {
		name   string
		target *appsv1.Deployment
		port   string
		from   peer
		want   bool
	}{
		{"modegridd to redis", cache, "redis", serverPod, true},
		{"other pod of the namespace to redis", cache, "redis", otherPod, false},
		{"client namespace to redis", cache, "redis", client, false},
		{"monitoring to redis", cache, "redis", prometheus, false},
		{"impostor labels in another namespace to redis", cache, "redis", impostor, false},
		{"client namespace to grpc", server, "grpc", client, true},
		{"same namespace to grpc", server, "grpc", otherPod, true},
		{"monitoring to metrics", server, "metrics", prometheus, true},
		{"client namespace to metrics", server, "metrics", client, false},
		{"same namespace to metrics", server, "metrics", otherPod, false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := admits(t, m.netpols, tc.target, tc.port, tc.from); got != tc.want {
				t.Errorf("admitted = %v; want %v", got, tc.want)
			}
		})
	}
	for name, p := range m.netpols {
		if len(p.Spec.PolicyTypes) != 1 || p.Spec.PolicyTypes[0] != networkingv1.PolicyTypeIngress {
			t.Errorf("NetworkPolicy %s: policyTypes %v; want [Ingress]", name, p.Spec.PolicyTypes)
		}
	}
}

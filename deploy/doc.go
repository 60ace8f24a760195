// Package deploy holds kelvard's deployment artifacts and the tests that
// check them: the Dockerfile build, docker-compose.yml (loaded with the
// compose-spec loader), deploy/prometheus.yml and deploy/alerts.yml
// (promtool check and unit tests), and the Kubernetes manifests under
// deploy/kubernetes (decoded strictly into the Kubernetes API types). The
// package has no code of its own; everything is in its tests.
package deploy

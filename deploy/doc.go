// Package deploy holds the files that package and run fugad, and the tests
// that hold them together.
//
// # Contents
//
//   - ../Dockerfile and ../.dockerignore: the container image, a static
//     binary on a distroless base running as a numeric non-root user.
//   - kubernetes/: Deployment, ClusterIP and headless Services,
//     HorizontalPodAutoscaler, PodDisruptionBudget and ServiceAccount.
//   - prometheus/: the scrape job, the alerting rules and their unit tests.
//   - grafana/: the dashboard.
//   - README.md: how to build, run, deploy, balance, scrape and alert.
//
// # Invariants
//
// The package has no code of its own. Its tests parse every file and check
// what the files must agree on: the ports the image exposes, the container
// declares, the probes dial and the scrape job keeps; the shutdown budget
// (terminationGracePeriodSeconds > preStop sleep + --drain-timeout); the
// non-root user; label selectors against pod labels; and every metric name
// used by an alert or a dashboard panel against the metrics the server
// exports. The builder stage's go build command is run as written, and the
// binary it produces is started with the Deployment's arguments on loopback
// addresses to check its health service and metrics endpoint.
//
// # Tools
//
// The Prometheus checks run promtool from $PROMTOOL or PATH. With the
// environment variable CI set, a missing promtool, or one built without
// Kubernetes service discovery, fails the tests; otherwise those checks
// are skipped.
package deploy

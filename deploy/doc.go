// Package deploy holds kinchain's container image and Kubernetes manifests
// and, in its tests, the offline checks that keep them honest:
//
//   - the Dockerfile's own go build command, run verbatim, yields a
//     statically linked binary that carries the build metadata, starts as a
//     non-root user in a read-only directory, answers its probes and drains
//     cleanly on SIGTERM (image_test.go);
//   - every manifest decodes strictly into the Kubernetes API types, and the
//     base, the overlays and the monitoring kustomization build in-process
//     with kustomize's krusty (manifests_test.go);
//   - ports, probe paths, the gRPC health service, flags and environment
//     variables, drain timing and resources agree with the server's code and
//     with the runbook's measured figures (crosscheck_test.go);
//   - every PromQL expression of the alert rules and the dashboard parses,
//     and every metric it names is exported by a real server scraped after
//     real requests (monitoring_test.go);
//   - BenchmarkCapacity measures what one replica can take (capacity_test.go).
//
// The package has no API of its own; it is a separate Go module so that the
// Kubernetes, kustomize and Prometheus dependencies of these checks stay out
// of the service's module. Run the checks with
//
//	cd deploy && go test ./...
package deploy

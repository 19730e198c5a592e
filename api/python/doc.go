// Package python holds the Python client of the fugad gRPC contract and the
// tests that run it.
//
// # Contents
//
//   - generate.sh regenerates stubs/ (committed) from the .proto files with
//     the operating system's protoc and gRPC Python plugin (Debian 12:
//     protobuf-compiler, protobuf-compiler-grpc); `generate.sh --check`
//     fails when stubs/ is stale.
//   - examples/separator_optimiser.py chooses the two separator pressures
//     of a fictional plant's train that maximise stabilised liquid, with
//     scipy's L-BFGS-B and one FlashBatch call per stage and stencil.
//
// # Tests
//
// The tests run Debian's own interpreter, /usr/bin/python3 (another
// python3 first on PATH may not see Debian's python3-grpcio,
// python3-protobuf and python3-scipy). TestSeparatorOptimiser starts a
// fugad server on loopback, runs the example against it and recomputes
// its objective through the Go client: the same value at the returned
// pressures within 1e-9 relative, and no higher value at ±1 % of either
// pressure (a local maximum). TestStubsFresh runs `generate.sh --check`.
// With CI=true a missing interpreter, package or generator fails the
// tests; otherwise they are skipped with the reason.
package python

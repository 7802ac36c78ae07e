// Package server is fluxroom's network edge: the gRPC services for stations
// and instructors, the room fan-out to watchers, and one listener that
// carries native gRPC (grpc.Server.Serve), gRPC-Web for the browser
// (through vanguard) and the dashboard's files.
//
// Wire types (fluxroompb) are converted to domain types in convert.go; every
// error leaves through the one mapping in errors.go.
package server

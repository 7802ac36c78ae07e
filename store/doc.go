// Package store keeps sessions, benches and readings in one bbolt file.
//
// Readings are append-only; a reading id is stored once per bench, so a
// station's retry never creates a duplicate. Records are protobuf messages of
// package recordpb, converted to and from domain types here and nowhere else.
// Every bucket and key codec is declared in buckets.go.
package store

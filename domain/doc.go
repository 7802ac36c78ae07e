// Package domain owns every physics rule of fluxroom: the experiments and
// their bench constants, unit conversion, least-squares fits, uncertainty
// propagation, verdicts and diagnoses.
//
// It is plain Go with no I/O, no clock reads and no protobuf: time comes in as
// an argument, and the store and server packages convert their own types to
// and from the ones declared here. Constants and formulas name their source
// beside them; see PHYSICS.md in the shared guide for the full list.
package domain
